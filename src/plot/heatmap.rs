//! Heat maps: a field over two coordinates (e.g. surface temperature over time and latitude)
//! with a colour bar, labelled contours and overlay lines, or a categorical map (e.g. which
//! climate regime exists at each pair of control values) with a legend of classes.
//!
//! The cells are one embedded PNG image drawn with `image-rendering: pixelated`, not one SVG
//! rectangle per cell: files stay small and show no hairline gaps between cells. Coordinates
//! are cell centres; cell edges lie halfway between neighbours. Unevenly spaced coordinates
//! (an equal-area latitude grid) are resampled onto a finer even pixel grid, each pixel taking
//! the value of the cell it falls in, so every cell keeps its true extent. NaN cells are
//! transparent. The continuous colour scale is viridis (perceptually uniform, lightness rising
//! monotonically, so it reads in greyscale); classes take evenly spaced viridis colours.
//! A categorical map with class lines (fold lines) is drawn one PNG pixel per screen pixel,
//! its colours changing at the lines themselves (see `class_regions`).

use plotters::style::text_anchor::{HPos, VPos};
use plotters::style::{Color, RGBColor};

use super::canvas::{
    self, draw_legend, encode_rgba_png, finite_range, legend_size, Anchor, Bitmap, Canvas, LegendEntry,
    Mapping, Occupancy, Pieces, PointShape, Rect, Swatch,
};
use super::chart::{Series, Stroke};
use super::class_regions;
use super::contour::contour_lines;
use super::style::{self, em, Sizes, BLACK, WHITE};
use super::PlotError;

/// A field on a grid of cell centres, with optional contours, overlays and classes.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct HeatMap {
    /// Title (bold, at the top).
    pub title: String,
    /// Cell centres along x (e.g. time), strictly increasing, `nx` values.
    pub x: Vec<f64>,
    /// Cell centres along y (e.g. latitude), strictly increasing, `ny` values.
    pub y: Vec<f64>,
    /// Cell boundaries along x, `nx + 1` strictly increasing values (e.g. a netCDF
    /// `bounds` variable); `None` puts them halfway between centres.
    pub x_edges: Option<Vec<f64>>,
    /// Cell boundaries along y, `ny + 1` values (e.g. `lat_bnds`, so an equal-area grid
    /// reaches the pole); `None` puts them halfway between centres.
    pub y_edges: Option<Vec<f64>>,
    /// Field values, `nx * ny` of them, one block per x value: `z[i * ny + j]` is the value
    /// at `(x[i], y[j])`. This is the memory order of a `(time, lat)` array such as
    /// `surface_temperature`. NaN marks a missing cell.
    pub z: Vec<f64>,
    /// x axis name with units, e.g. "Time (year)".
    pub x_label: String,
    /// y axis name with units, e.g. "Latitude (°N)".
    pub y_label: String,
    /// Name of the field with units, written along the colour bar (or above the classes).
    pub z_label: String,
    /// Contour levels (in z units) and the label written on each line.
    pub contour_levels: Vec<(f64, String)>,
    /// Lines or points drawn over the map (e.g. the ice-edge latitude); `colour` picks
    /// white-on-black (even) or black-on-white (odd) so they show on any part of viridis.
    pub overlay: Vec<Series>,
    /// Classes of a categorical map: the z value of each class and its name. `None` draws a
    /// continuous colour scale.
    pub categorical: Option<Vec<(f64, String)>>,
    /// Fixed colour-scale limits (lower, upper); `None` uses the range of the finite values.
    pub z_range: Option<(f64, f64)>,
    /// Cells blended smoothly instead of drawn sharp: for fields that change from cell to
    /// cell faster than a few screen pixels (e.g. a resolved seasonal cycle), where sharp
    /// cells narrower than the pixel grid beat against it (moiré).
    pub smooth: bool,
    /// Logarithmic x axis (all x values and edges must be positive).
    pub x_log: bool,
    /// Logarithmic y axis (all y values and edges must be positive).
    pub y_log: bool,
    /// Colours of the classes of a categorical map, one per class; `None` takes evenly
    /// spaced viridis colours.
    pub class_colours: Option<Vec<RGBColor>>,
    /// Lines (data units) along which the class of a categorical map changes, e.g. fold
    /// lines. Where one crosses a row's centre between two cells of different classes, the
    /// colours change at the line across the row instead of at the cell edge.
    pub class_lines: Vec<Vec<(f64, f64)>>,
    /// A note printed under the class list (e.g. what a class boundary means).
    pub note: Option<String>,
    /// Picture width in pixels (64 ..= 10000).
    pub width_px: u32,
    /// Picture height in pixels (64 ..= 10000).
    pub height_px: u32,
}

fn check_increasing(what: &str, v: &[f64]) -> Result<(), PlotError> {
    for (i, w) in v.windows(2).enumerate() {
        let increasing = w[0].is_finite() && w[1].is_finite() && w[1] > w[0];
        if !increasing {
            return Err(PlotError::NotIncreasing {
                what: what.to_string(),
                index: i + 1,
                value: w[1],
                previous: w[0],
            });
        }
    }
    if let [v0] = v {
        if !v0.is_finite() {
            return Err(PlotError::NotIncreasing {
                what: what.to_string(),
                index: 0,
                value: *v0,
                previous: f64::NAN,
            });
        }
    }
    Ok(())
}

fn validate(m: &HeatMap) -> Result<(), PlotError> {
    canvas::check_size(m.width_px, m.height_px)?;
    check_increasing("heat map x", &m.x)?;
    check_increasing("heat map y", &m.y)?;
    for (what, n) in [("heat map x", m.x.len()), ("heat map y", m.y.len())] {
        if n == 0 {
            return Err(PlotError::LengthMismatch {
                what: what.to_string(),
                expected: 1,
                found: 0,
            });
        }
    }
    for (what, e, n) in [
        ("heat map x_edges", &m.x_edges, m.x.len()),
        ("heat map y_edges", &m.y_edges, m.y.len()),
    ] {
        if let Some(e) = e {
            if e.len() != n + 1 {
                return Err(PlotError::LengthMismatch {
                    what: what.to_string(),
                    expected: n + 1,
                    found: e.len(),
                });
            }
            check_increasing(what, e)?;
        }
    }
    if m.z.len() != m.x.len() * m.y.len() {
        return Err(PlotError::LengthMismatch {
            what: format!("heat map z ({} x values times {} y values)", m.x.len(), m.y.len()),
            expected: m.x.len() * m.y.len(),
            found: m.z.len(),
        });
    }
    for (s, ser) in m.overlay.iter().enumerate() {
        if ser.y.len() != ser.x.len() {
            return Err(PlotError::LengthMismatch {
                what: match &ser.label {
                    Some(l) => format!("heat map overlay {s} (\"{l}\"): y"),
                    None => format!("heat map overlay {s}: y"),
                },
                expected: ser.x.len(),
                found: ser.y.len(),
            });
        }
    }
    if let Some(cl) = &m.categorical {
        let ny = m.y.len();
        for (k, &v) in m.z.iter().enumerate() {
            if v.is_finite() && class_index(cl, v).is_none() {
                return Err(PlotError::UnknownClass {
                    value: v,
                    i: k / ny,
                    j: k % ny,
                    classes: cl.iter().map(|(c, _)| *c).collect(),
                });
            }
        }
    }
    if let Some((lo, hi)) = m.z_range {
        if !(lo.is_finite() && hi.is_finite() && lo < hi) {
            return Err(PlotError::BadRange {
                what: "heat map z_range".into(),
                lo,
                hi,
            });
        }
    }
    Ok(())
}

/// Cell edges of centres `c`: halfway between neighbours, the outer ones half a spacing out.
fn edges(c: &[f64]) -> Vec<f64> {
    match c.len() {
        0 => vec![0.0, 1.0],
        1 => {
            let d = if c[0] == 0.0 { 0.5 } else { 0.05 * c[0].abs() };
            vec![c[0] - d, c[0] + d]
        }
        n => {
            let mut e = Vec::with_capacity(n + 1);
            e.push(c[0] - 0.5 * (c[1] - c[0]));
            e.extend(c.windows(2).map(|w| 0.5 * (w[0] + w[1])));
            e.push(c[n - 1] + 0.5 * (c[n - 1] - c[n - 2]));
            e
        }
    }
}

/// For each pixel of an even grid across `edges`, the cell it falls in. Even spacing gives one
/// pixel per cell; uneven spacing gives enough pixels that the narrowest cell gets two.
fn pixel_cells(edges: &[f64]) -> Vec<usize> {
    let n = edges.len() - 1;
    let widths: Vec<f64> = edges.windows(2).map(|w| w[1] - w[0]).collect();
    let span = edges[n] - edges[0];
    let mean = span / n as f64;
    let even = widths.iter().all(|w| (w - mean).abs() <= 1e-6 * mean);
    if even {
        return (0..n).collect();
    }
    let narrow = widths.iter().copied().fold(f64::INFINITY, f64::min);
    let m = ((2.0 * span / narrow).ceil() as usize).clamp(n, 4096);
    (0..m)
        .map(|p| {
            let v = edges[0] + (p as f64 + 0.5) * span / m as f64;
            // Index of the last edge at or below v, i.e. the cell holding v.
            edges.partition_point(|e| *e <= v).saturating_sub(1).min(n - 1)
        })
        .collect()
}

/// Index of the class whose value equals `v` (to rounding: 1e-9 relative).
fn class_index(classes: &[(f64, String)], v: f64) -> Option<usize> {
    classes
        .iter()
        .position(|(c, _)| (c - v).abs() <= 1e-9 * c.abs().max(1.0))
}

/// How z values become colours.
enum Scale {
    Continuous { lo: f64, hi: f64 },
    Classes(Vec<(f64, String)>, Option<Vec<RGBColor>>),
}

impl Scale {
    fn class_colour(&self, k: usize) -> RGBColor {
        match self {
            Scale::Classes(_, Some(c)) if k < c.len() => c[k],
            Scale::Classes(cl, _) if cl.len() > 1 => style::viridis(k as f64 / (cl.len() - 1) as f64),
            _ => style::viridis(0.5),
        }
    }

    /// Colour of one value; `None` (transparent) for NaN and for values that are none of
    /// the classes (which `validate` has already refused).
    fn colour(&self, v: f64) -> Option<RGBColor> {
        if !v.is_finite() {
            return None;
        }
        match self {
            Scale::Continuous { lo, hi } => Some(style::viridis((v - lo) / (hi - lo))),
            Scale::Classes(cl, _) => class_index(cl, v).map(|k| self.class_colour(k)),
        }
    }
}

/// Cell boundaries along x and y: given, or halfway between centres.
fn cell_edges(m: &HeatMap) -> (Vec<f64>, Vec<f64>) {
    (
        m.x_edges.clone().unwrap_or_else(|| edges(&m.x)),
        m.y_edges.clone().unwrap_or_else(|| edges(&m.y)),
    )
}

/// The cells as a PNG: rows from the top (largest y) down.
fn field_png(m: &HeatMap, scale: &Scale) -> Result<Vec<u8>, PlotError> {
    let ny = m.y.len();
    let (xe, ye) = cell_edges(m);
    let cols = pixel_cells(&xe);
    let mut rows = pixel_cells(&ye);
    rows.reverse();
    let mut px = Vec::with_capacity(cols.len() * rows.len());
    for &j in &rows {
        for &i in &cols {
            px.push(scale.colour(m.z[i * ny + j]));
        }
    }
    encode_rgba_png(cols.len() as u32, rows.len() as u32, &px)
}

/// Classes cut along class lines, one PNG pixel per screen pixel of the plot area.
fn runs_png(runs: &[class_regions::RowRuns], map: &Mapping, scale: &Scale) -> Result<Vec<u8>, PlotError> {
    let (w, h) = (map.area.w().round().max(1.0), map.area.h().round().max(1.0));
    let mut px = Vec::with_capacity((w * h) as usize);
    let mut scratch = Vec::new();
    for r in 0..h as usize {
        let y = map.y.1 - (r as f64 + 0.5) / h * (map.y.1 - map.y.0);
        let row = runs.iter().find(|q| y >= q.band.0 && y <= q.band.1);
        for c in 0..w as usize {
            let x = map.x.0 + (c as f64 + 0.5) / w * (map.x.1 - map.x.0);
            let k = row.and_then(|q| q.class_at(x, y, &mut scratch));
            px.push(k.map(|k| scale.class_colour(k)));
        }
    }
    encode_rgba_png(w as u32, h as u32, &px)
}

/// The colour bar as a 1-pixel-wide PNG, top = upper limit.
fn bar_png() -> Result<Vec<u8>, PlotError> {
    const N: u32 = 256;
    let px: Vec<Option<RGBColor>> = (0..N)
        .map(|r| Some(style::viridis(1.0 - (f64::from(r) + 0.5) / f64::from(N))))
        .collect();
    encode_rgba_png(1, N, &px)
}

fn overlay_entries(m: &HeatMap) -> Vec<LegendEntry> {
    m.overlay
        .iter()
        .filter_map(|s| {
            let (core, casing) = style::overlay_colours(s.colour);
            let label = s.label.clone()?;
            let swatch = s.stroke.swatch(core, Some(casing));
            Some(LegendEntry { label, swatch })
        })
        .collect()
}

/// Geometry of a heat map picture.
struct Layout {
    title: Vec<String>,
    map: Mapping,
    xt: (Vec<f64>, Vec<String>),
    yt: (Vec<f64>, Vec<String>),
    /// Top-left corner of the overlay legend row.
    legend_at: Option<(f64, f64)>,
    /// Colour bar (continuous) or top-left of the class list (categorical).
    side: Rect,
    /// Colour-bar ticks.
    zt: (Vec<f64>, Vec<String>),
}

fn layout(m: &HeatMap, scale: &Scale, sizes: &Sizes) -> Result<Layout, PlotError> {
    let (w, h) = (f64::from(m.width_px), f64::from(m.height_px));
    let (xe, ye) = cell_edges(m);
    let (xr, yr) = ((xe[0], xe[xe.len() - 1]), (ye[0], ye[ye.len() - 1]));
    let title = canvas::wrap_text(&m.title, sizes.title, true, w - 2.0 * sizes.margin);
    let mut top = sizes.margin + canvas::title_height(title.len(), sizes);
    let entries = overlay_entries(m);
    let legend_at = if entries.is_empty() {
        top += 0.6 * em(sizes.tick);
        None
    } else {
        let at = top;
        top += legend_size(&entries, true, sizes).1 + sizes.gap;
        Some(at)
    };
    let bottom = h - 0.6 * sizes.margin - canvas::x_axis_height(true, sizes);
    let plot_h = bottom - top;
    if plot_h < 4.0 * em(sizes.tick) {
        return Err(PlotError::TooSmall {
            width: m.width_px,
            height: m.height_px,
            panels: 1,
            plot_height: plot_h,
        });
    }
    let yt = if m.y_log {
        canvas::log_ticks(yr.0, yr.1, plot_h, sizes)
    } else {
        canvas::y_ticks(yr.0, yr.1, plot_h, sizes)
    };
    let left = sizes.margin + canvas::y_axis_width(&yt.1, true, sizes);
    // Right-hand side: colour bar with ticks and name, or the class list.
    let bar_w = 1.3 * em(sizes.axis_label);
    let (zt, side_w) = match scale {
        Scale::Continuous { lo, hi } => {
            let zt = canvas::y_ticks(*lo, *hi, plot_h, sizes);
            let widest =
                zt.1.iter()
                    .map(|s| style::text_width(s, sizes.tick, false))
                    .fold(0.0, f64::max);
            let side =
                bar_w + sizes.tick_len + 0.5 * sizes.gap + widest + sizes.gap + 1.25 * em(sizes.axis_label);
            (zt, side)
        }
        Scale::Classes(cl, _) => {
            let widest = cl
                .iter()
                .map(|(_, n)| style::text_width(n, sizes.legend, false))
                .fold(0.0, f64::max);
            let widest = widest.max(style::text_width("no data", sizes.legend, false));
            let list = bar_w + sizes.gap + widest;
            let head = style::text_width(&m.z_label, sizes.legend, true);
            ((Vec::new(), Vec::new()), list.max(head))
        }
    };
    let gap_to_side = 3.0 * sizes.gap;
    let right = w - sizes.margin - side_w - gap_to_side;
    if right - left < 6.0 * em(sizes.tick) {
        return Err(PlotError::TooSmall {
            width: m.width_px,
            height: m.height_px,
            panels: 1,
            plot_height: plot_h,
        });
    }
    let area = Rect::at(left, top, right - left, plot_h);
    let xt = if m.x_log {
        canvas::log_ticks(xr.0, xr.1, area.w(), sizes)
    } else {
        canvas::x_ticks(xr.0, xr.1, area.w(), sizes)
    };
    let side = match scale {
        Scale::Continuous { .. } => Rect::at(right + gap_to_side, top, bar_w, plot_h),
        Scale::Classes(..) => Rect::at(right + gap_to_side, top, side_w, plot_h),
    };
    Ok(Layout {
        title,
        map: Mapping { area, x: xr, y: yr },
        xt,
        yt,
        legend_at: legend_at.map(|y| (left, y)),
        side,
        zt,
    })
}

/// Points of a series in pixels, split at NaN and clipped to the plot area.
fn overlay_pixels(s: &Series, map: &Mapping) -> (Pieces, Vec<(f64, f64)>) {
    let mut lines = Vec::new();
    let mut dots = Vec::new();
    let a = map.area;
    for run in canvas::finite_runs(&s.x, &s.y) {
        let px: Vec<(f64, f64)> = run.iter().map(|&(x, y)| map.px(x, y)).collect();
        if matches!(s.stroke, Stroke::Solid | Stroke::Dashed) && px.len() > 1 {
            lines.extend(canvas::clip_polyline(&px, &a));
        } else {
            dots.extend(
                px.into_iter()
                    .filter(|p| p.0 >= a.x0 && p.0 <= a.x1 && p.1 >= a.y0 && p.1 <= a.y1),
            );
        }
    }
    (lines, dots)
}

/// Polyline length in pixels and the point at arc-length fraction `f`.
fn point_along(l: &[(f64, f64)], f: f64) -> (f64, f64) {
    let total: f64 = l
        .windows(2)
        .map(|w| (w[1].0 - w[0].0).hypot(w[1].1 - w[0].1))
        .sum();
    let mut left = f * total;
    for w in l.windows(2) {
        let d = (w[1].0 - w[0].0).hypot(w[1].1 - w[0].1);
        if d >= left && d > 0.0 {
            let t = left / d;
            return (w[0].0 + t * (w[1].0 - w[0].0), w[0].1 + t * (w[1].1 - w[0].1));
        }
        left -= d;
    }
    l[l.len() - 1]
}

fn length(l: &[(f64, f64)]) -> f64 {
    l.windows(2)
        .map(|w| (w[1].0 - w[0].0).hypot(w[1].1 - w[0].1))
        .sum()
}

/// Draws a heat map and returns its SVG text (see the module doc).
pub fn heatmap_svg(m: &HeatMap) -> Result<String, PlotError> {
    heatmap_layout(m).map(|(svg, _)| svg)
}

/// The map with x and/or y (centres, edges, overlays) replaced by log10 for logarithmic axes.
fn to_log(m: &HeatMap) -> Result<HeatMap, PlotError> {
    let mut out = m.clone();
    let l = |v: f64| if v > 0.0 { v.log10() } else { f64::NAN };
    let (xe, ye) = cell_edges(m);
    for (on, what, e) in [
        (m.x_log, "heat map x (log axis)", &xe),
        (m.y_log, "heat map y (log axis)", &ye),
    ] {
        if on && e[0] <= 0.0 {
            return Err(PlotError::BadRange {
                what: what.into(),
                lo: e[0],
                hi: e[e.len() - 1],
            });
        }
    }
    if m.x_log {
        out.x = m.x.iter().map(|&v| l(v)).collect();
        out.x_edges = Some(xe.iter().map(|&v| l(v)).collect());
        for s in &mut out.overlay {
            s.x.iter_mut().for_each(|v| *v = l(*v));
        }
        for line in &mut out.class_lines {
            line.iter_mut().for_each(|p| p.0 = l(p.0));
        }
    }
    if m.y_log {
        out.y = m.y.iter().map(|&v| l(v)).collect();
        out.y_edges = Some(ye.iter().map(|&v| l(v)).collect());
        for s in &mut out.overlay {
            s.y.iter_mut().for_each(|v| *v = l(*v));
        }
        for line in &mut out.class_lines {
            line.iter_mut().for_each(|p| p.1 = l(p.1));
        }
    }
    Ok(out)
}

/// Draws a heat map and returns its SVG text and where every text, legend and line went.
pub fn heatmap_layout(m: &HeatMap) -> Result<(String, canvas::LayoutReport), PlotError> {
    validate(m)?;
    style::ensure_fonts()?;
    let logged;
    let m = if m.x_log || m.y_log {
        logged = to_log(m)?;
        &logged
    } else {
        m
    };
    let sizes = Sizes::for_picture(m.width_px, m.height_px);
    let scale = match &m.categorical {
        Some(cl) => Scale::Classes(cl.clone(), m.class_colours.clone()),
        None => {
            let (lo, hi) = m
                .z_range
                .unwrap_or_else(|| canvas::padded(finite_range(&m.z), 0.0));
            Scale::Continuous { lo, hi }
        }
    };
    let lay = layout(m, &scale, &sizes)?;
    let map = &lay.map;
    // Smooth cells when asked and the cells are narrower than three screen pixels.
    let (xe, ye) = cell_edges(m);
    let smooth = m.smooth
        && ((xe.len() - 1) as f64 > map.area.w() / 3.0 || (ye.len() - 1) as f64 > map.area.h() / 3.0);
    // Classes as runs per row, cut at the class lines (reported as polygons).
    let runs = match &scale {
        Scale::Classes(cl, _) => {
            let class: Vec<Option<usize>> = m.z.iter().map(|&v| class_index(cl, v)).collect();
            Some(class_regions::row_runs(
                &class,
                (&m.x, &m.y),
                (&xe, &ye),
                &m.class_lines,
            ))
        }
        Scale::Continuous { .. } => None,
    };
    let png = match &runs {
        Some(runs) if !m.class_lines.is_empty() => runs_png(runs, map, &scale)?,
        _ => field_png(m, &scale)?,
    };
    let mut bitmaps = vec![Bitmap {
        rect: map.area,
        png,
        smooth: smooth && matches!(scale, Scale::Continuous { .. }),
    }];
    if matches!(scale, Scale::Continuous { .. }) {
        bitmaps.push(Bitmap {
            rect: lay.side,
            png: bar_png()?,
            smooth: false,
        });
    }

    // Contours in pixels, clipped.
    let mut contours: Vec<(f64, &str, Pieces)> = Vec::new();
    for (level, label) in &m.contour_levels {
        let mut pieces = Vec::new();
        for l in contour_lines(&m.x, &m.y, &m.z, *level)? {
            let px: Vec<(f64, f64)> = l.iter().map(|&(x, y)| map.px(x, y)).collect();
            pieces.extend(canvas::clip_polyline(&px, &map.area));
        }
        contours.push((*level, label.as_str(), pieces));
    }
    let overlays: Vec<_> = m.overlay.iter().map(|s| overlay_pixels(s, map)).collect();

    // Contour labels: on the longest piece of each level, where they cover the fewest overlay
    // points and no other label, inside the frame.
    let mut occ = Occupancy::new(map.area, 3.0 * sizes.line.max(1.0));
    for (lines, dots) in &overlays {
        for l in lines {
            occ.mark_polyline(l);
        }
        for &(x, y) in dots {
            occ.mark_rect(&Rect::at(x, y, 0.0, 0.0).inflate(1.5 * sizes.marker));
        }
    }
    let inner = map.area.inflate(-0.5 * sizes.gap);
    let mut labels: Vec<(Rect, &str)> = Vec::new();
    for (_, label, pieces) in &contours {
        if label.is_empty() {
            continue;
        }
        let Some(longest) = pieces.iter().max_by(|a, b| length(a).total_cmp(&length(b))) else {
            continue;
        };
        let pad = 0.3 * em(sizes.annotation);
        let (w, h) = (
            style::text_width(label, sizes.annotation, false) + 2.0 * pad,
            1.35 * em(sizes.annotation),
        );
        let mut best: Option<(u64, Rect)> = None;
        for f in [0.5, 0.35, 0.65, 0.2, 0.8, 0.1, 0.9] {
            let p = point_along(longest, f);
            let mut r = Rect::at(p.0 - 0.5 * w, p.1 - 0.5 * h, w, h);
            // Keep inside the frame by sliding, not dropping.
            let dx = (inner.x0 - r.x0).max(0.0) - (r.x1 - inner.x1).max(0.0);
            let dy = (inner.y0 - r.y0).max(0.0) - (r.y1 - inner.y1).max(0.0);
            r = Rect::at(r.x0 + dx, r.y0 + dy, w, h);
            let ink = occ.ink_in(&r);
            if best.is_none_or(|(b, _)| ink < b) {
                best = Some((ink, r));
            }
            if ink == 0 {
                break;
            }
        }
        if let Some((_, r)) = best {
            occ.mark_rect(&r.inflate(3.0 * sizes.line));
            labels.push((r, label));
        }
    }

    canvas::draw_svg(m.width_px, m.height_px, &bitmaps, |c| {
        canvas::draw_title(c, &lay.title, 0.5 * f64::from(m.width_px), sizes.margin, &sizes)?;
        let mut data = canvas::PlotData {
            area: map.area,
            lines: Vec::new(),
        };
        for (lines, dots) in &overlays {
            data.lines.extend(lines.iter().cloned());
            data.lines.extend(dots.iter().map(|&p| vec![p]));
        }
        for (_, _, pieces) in &contours {
            data.lines.extend(pieces.iter().cloned());
        }
        c.note_plot(data);
        for r in runs.iter().flatten() {
            for (k, poly) in r.polygons() {
                c.note_region(k, poly.iter().map(|&(x, y)| map.px(x, y)).collect());
            }
        }
        // Contours: black with a thin white halo, visible on both ends of viridis.
        for (_, _, pieces) in &contours {
            for l in pieces {
                c.line(l, WHITE.to_rgba(), contour_width(&sizes) + 2.0 * sizes.halo)?;
            }
            for l in pieces {
                c.line(l, BLACK.to_rgba(), contour_width(&sizes))?;
            }
        }
        for (s, (lines, dots)) in m.overlay.iter().zip(&overlays) {
            draw_overlay(c, s, lines, dots, &sizes)?;
        }
        canvas::draw_axes(
            c,
            map,
            &lay.xt,
            &lay.yt,
            Some((
                &m.x_label,
                map.area.y1 + sizes.tick_len + 0.5 * sizes.gap + 1.25 * em(sizes.tick) + 0.5 * sizes.gap,
            )),
            Some((&m.y_label, sizes.margin)),
            &sizes,
        )?;
        for (r, label) in &labels {
            c.fill_rect(*r, WHITE.mix(0.85))?;
            c.text(
                label,
                (0.5 * (r.x0 + r.x1), 0.5 * (r.y0 + r.y1)),
                sizes.annotation,
                false,
                Anchor::new(HPos::Center, VPos::Center),
                false,
                BLACK,
            )?;
        }
        if let Some(at) = lay.legend_at {
            draw_legend(c, &overlay_entries(m), at, true, false, &sizes)?;
        }
        match &scale {
            Scale::Continuous { lo, hi } => draw_colour_bar(c, m, &lay, (*lo, *hi), &contours, &sizes),
            Scale::Classes(cl, _) => draw_classes(c, m, &lay, cl, &scale, &sizes),
        }
    })
}

fn draw_overlay(
    c: &Canvas,
    s: &Series,
    lines: &[Vec<(f64, f64)>],
    dots: &[(f64, f64)],
    sizes: &Sizes,
) -> Result<(), PlotError> {
    let (core, casing) = style::overlay_colours(s.colour);
    for l in lines {
        c.line(l, casing.to_rgba(), sizes.line + 2.0 * sizes.halo)?;
    }
    for l in lines {
        if s.stroke == Stroke::Dashed {
            c.dashed(l, core.to_rgba(), sizes.line, sizes.dash)?;
        } else {
            c.line(l, core.to_rgba(), sizes.line)?;
        }
    }
    let shape = match s.stroke {
        Stroke::ArrowsUp => PointShape::Up,
        Stroke::ArrowsDown => PointShape::Down,
        _ => PointShape::Disc,
    };
    let r = if matches!(s.stroke, Stroke::Solid | Stroke::Dashed) {
        0.8 * sizes.line
    } else {
        sizes.marker
    };
    for &p in dots {
        c.point(shape, p, r + 1.5 * sizes.halo, casing.to_rgba())?;
        c.point(shape, p, r, core.to_rgba())?;
    }
    Ok(())
}

/// Width of contour lines.
fn contour_width(sizes: &Sizes) -> f64 {
    1.1 * sizes.line
}

type Contours<'a> = [(f64, &'a str, Pieces)];

fn draw_colour_bar(
    c: &Canvas,
    m: &HeatMap,
    lay: &Layout,
    (lo, hi): (f64, f64),
    contours: &Contours,
    sizes: &Sizes,
) -> Result<(), PlotError> {
    let bar = lay.side;
    let bar_map = Mapping {
        area: bar,
        x: (0.0, 1.0),
        y: (lo, hi),
    };
    // Contour levels as lines across the bar.
    for (level, _, _) in contours {
        if *level >= lo && *level <= hi {
            let (_, y) = bar_map.px(0.0, *level);
            c.line(&[(bar.x0, y), (bar.x1, y)], WHITE.to_rgba(), 2.6 * sizes.line)?;
            c.line(&[(bar.x0, y), (bar.x1, y)], BLACK.to_rgba(), sizes.line)?;
        }
    }
    c.frame_rect(bar, BLACK.to_rgba(), sizes.frame)?;
    let mut widest: f64 = 0.0;
    for (&t, s) in lay.zt.0.iter().zip(&lay.zt.1) {
        let (_, y) = bar_map.px(0.0, t);
        c.line(
            &[(bar.x1, y), (bar.x1 + sizes.tick_len, y)],
            BLACK.to_rgba(),
            sizes.frame,
        )?;
        c.text(
            s,
            (bar.x1 + sizes.tick_len + 0.5 * sizes.gap, y),
            sizes.tick,
            false,
            Anchor::new(HPos::Left, VPos::Center),
            false,
            BLACK,
        )?;
        widest = widest.max(style::text_width(s, sizes.tick, false));
    }
    c.text(
        &m.z_label,
        (
            bar.x1 + sizes.tick_len + 0.5 * sizes.gap + widest + sizes.gap,
            0.5 * (bar.y0 + bar.y1),
        ),
        sizes.axis_label,
        false,
        Anchor::new(HPos::Center, VPos::Top),
        true,
        BLACK,
    )
}

fn draw_classes(
    c: &Canvas,
    m: &HeatMap,
    lay: &Layout,
    classes: &[(f64, String)],
    scale: &Scale,
    sizes: &Sizes,
) -> Result<(), PlotError> {
    let at = lay.side;
    let mut y = at.y0;
    if !m.z_label.is_empty() {
        c.text(
            &m.z_label,
            (at.x0, y),
            sizes.legend,
            true,
            Anchor::new(HPos::Left, VPos::Top),
            false,
            BLACK,
        )?;
        y += 1.6 * em(sizes.legend);
    }
    let row = 1.6 * em(sizes.legend);
    let sw = 1.3 * em(sizes.axis_label);
    // Highest class first, matching the top-down order of the colour scale.
    let entries: Vec<LegendEntry> = classes
        .iter()
        .enumerate()
        .rev()
        .map(|(k, (_, name))| {
            c.note_class(name, scale.class_colour(k));
            LegendEntry {
                label: name.clone(),
                swatch: Swatch::Fill(scale.class_colour(k).to_rgba()),
            }
        })
        .collect();
    let missing = m.z.iter().any(|v| !v.is_finite());
    let no_data = LegendEntry {
        label: "no data".into(),
        swatch: Swatch::Fill(WHITE.to_rgba()),
    };
    for e in entries.iter().chain(missing.then_some(&no_data)) {
        let r = Rect::at(at.x0, y + 0.1 * row, sw, 0.8 * row);
        if let Swatch::Fill(col) = e.swatch {
            c.fill_rect(r, col)?;
        }
        c.frame_rect(r, BLACK.to_rgba(), 0.6 * sizes.frame)?;
        c.text(
            &e.label,
            (at.x0 + sw + sizes.gap, y + 0.5 * row),
            sizes.legend,
            false,
            Anchor::new(HPos::Left, VPos::Center),
            false,
            BLACK,
        )?;
        y += row;
    }
    if let Some(note) = &m.note {
        y += 0.5 * row;
        for line in canvas::wrap_text(note, sizes.annotation, false, at.w()) {
            c.text(
                &line,
                (at.x0, y),
                sizes.annotation,
                false,
                Anchor::new(HPos::Left, VPos::Top),
                false,
                BLACK,
            )?;
            y += 1.3 * em(sizes.annotation);
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::render::svg_to_pixmap;

    /// Invented latitude-time field: warm equator, cold pole, slow warming over time.
    fn field() -> HeatMap {
        let x: Vec<f64> = (0..40).map(|i| f64::from(i) * 2.5).collect();
        let y: Vec<f64> = (0..18).map(|j| 2.5 + 5.0 * f64::from(j)).collect();
        let mut z = Vec::new();
        for &t in &x {
            for &lat in &y {
                let s = (lat.to_radians()).sin();
                z.push(300.0 - 50.0 * s * s + 0.1 * t);
            }
        }
        HeatMap {
            title: "Surface temperature".into(),
            x,
            y,
            z,
            x_label: "Time (year)".into(),
            y_label: "Latitude (°N)".into(),
            z_label: "Temperature (K)".into(),
            contour_levels: vec![(273.15, "273.15 K".into())],
            width_px: 900,
            height_px: 560,
            ..HeatMap::default()
        }
    }

    #[test]
    fn svg_parses_and_names_the_axes_and_scale() {
        let svg = heatmap_svg(&field()).unwrap();
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let texts: Vec<String> = doc
            .descendants()
            .filter(|n| n.has_tag_name("text"))
            .map(|n| n.text().unwrap_or("").trim().to_string())
            .collect();
        for want in [
            "Surface temperature",
            "Time (year)",
            "Latitude (°N)",
            "Temperature (K)",
            "273.15 K",
        ] {
            assert!(texts.iter().any(|s| s == want), "missing {want:?}");
        }
        let images: Vec<_> = doc.descendants().filter(|n| n.has_tag_name("image")).collect();
        assert_eq!(images.len(), 2, "field and colour bar");
        assert_eq!(images[0].attribute("image-rendering"), Some("pixelated"));
    }

    #[test]
    fn png_shows_the_field_in_viridis_and_the_title() {
        let m = field();
        let svg = heatmap_svg(&m).unwrap();
        let pm = svg_to_pixmap(&svg).unwrap();
        assert_eq!((pm.width(), pm.height()), (900, 560));
        let sizes = Sizes::for_picture(900, 560);
        style::ensure_fonts().unwrap();
        let (zmin, zmax) = finite_range(&m.z).unwrap();
        let scale = Scale::Continuous { lo: zmin, hi: zmax };
        let lay = layout(&m, &scale, &sizes).unwrap();
        // Sample the cell nearest the pole at the start and the equator at the end: their
        // colours must be close to viridis at the two ends of the data range.
        for (t, lat, v) in [(0.0, 87.5, m.z[17]), (97.5, 2.5, m.z[39 * 18])] {
            let (px, py) = lay.map.px(t, lat);
            let got = pm.pixel(px as u32, py as u32).unwrap().demultiply();
            let want = style::viridis((v - zmin) / (zmax - zmin));
            let diff = (i32::from(got.red()) - i32::from(want.0)).abs()
                + (i32::from(got.green()) - i32::from(want.1)).abs()
                + (i32::from(got.blue()) - i32::from(want.2)).abs();
            // Nearest-neighbour sampling copies cell colours; allow a few units for rounding in
            // resvg's premultiplied-alpha arithmetic.
            assert!(diff <= 6, "at ({t}, {lat}): got {got:?}, want {want:?}");
        }
        let mut dark = 0;
        for y in 0..35 {
            for x in 250..650 {
                let p = pm.pixel(x, y).unwrap().demultiply();
                if u32::from(p.red()) + u32::from(p.green()) + u32::from(p.blue()) < 300 {
                    dark += 1;
                }
            }
        }
        assert!(dark > 300, "title missing: {dark} dark pixels");
    }

    #[test]
    fn contour_lands_on_the_analytic_latitude() {
        // T = 300 - 50 sin^2(lat) + 0.1 t equals 273.15 K where
        // sin^2(lat) = (26.85 + 0.1 t) / 50; at t = 0 that is lat = 47.18 deg.
        let m = field();
        let lines = contour_lines(&m.x, &m.y, &m.z, 273.15).unwrap();
        assert_eq!(lines.len(), 1);
        let at_start = lines[0].iter().find(|p| p.0 == 0.0).expect("line reaches t = 0");
        let want = (26.85f64 / 50.0).sqrt().asin().to_degrees();
        // Linear interpolation between latitudes 5 deg apart of a smooth profile: error well
        // under 0.2 deg here (curvature of sin^2 over one 5 deg step).
        assert!((at_start.1 - want).abs() < 0.2, "{} vs {want}", at_start.1);
    }

    #[test]
    fn uneven_cells_keep_their_extent() {
        let e = edges(&[0.0, 1.0, 3.0]);
        assert_eq!(e, vec![-0.5, 0.5, 2.0, 4.0]);
        let cells = pixel_cells(&e);
        // The middle cell spans 1.5 of 4.5 units: a third of the pixels.
        let share = cells.iter().filter(|&&c| c == 1).count() as f64 / cells.len() as f64;
        assert!((share - 1.5 / 4.5).abs() < 1.0 / cells.len() as f64, "{share}");
        assert_eq!(pixel_cells(&edges(&[0.0, 1.0, 2.0])), vec![0, 1, 2]);
    }

    #[test]
    fn given_edges_set_the_map_extent() {
        // Equal-area bands: edges asin(j / n) reach the pole; midpoints would stop short.
        let n = 6;
        let mut m = field();
        m.y = (0..n)
            .map(|j| ((f64::from(j) + 0.5) / f64::from(n)).asin().to_degrees())
            .collect();
        m.y_edges = Some(
            (0..=n)
                .map(|j| (f64::from(j) / f64::from(n)).asin().to_degrees())
                .collect(),
        );
        m.z =
            m.x.iter()
                .flat_map(|&t| m.y.iter().map(move |&l| 250.0 + 0.5 * l + 0.1 * t))
                .collect();
        style::ensure_fonts().unwrap();
        let scale = Scale::Continuous { lo: 250.0, hi: 300.0 };
        let lay = layout(&m, &scale, &Sizes::for_picture(900, 560)).unwrap();
        assert_eq!(lay.map.y, (0.0, 90.0));
        // The top band (asin(5/6) = 56.4 deg to 90 deg) gets its true share of the pixel rows.
        let rows = pixel_cells(m.y_edges.as_ref().unwrap());
        let top = rows.iter().filter(|&&j| j == 5).count() as f64 / rows.len() as f64;
        let want = (90.0 - (5.0f64 / 6.0).asin().to_degrees()) / 90.0;
        assert!((top - want).abs() <= 1.0 / rows.len() as f64, "{top} vs {want}");
    }

    #[test]
    fn nan_cells_are_transparent() {
        let mut m = field();
        m.z[5 * 18 + 9] = f64::NAN;
        let scale = Scale::Continuous { lo: 250.0, hi: 304.0 };
        let png = field_png(&m, &scale).unwrap();
        let pm = resvg::tiny_skia::Pixmap::decode_png(&png).unwrap();
        assert_eq!((pm.width(), pm.height()), (40, 18));
        // Row 0 is the top (largest latitude): y index 9 is row 17 - 9 = 8.
        assert_eq!(pm.pixel(5, 8).unwrap().alpha(), 0);
        assert_eq!(pm.pixel(6, 8).unwrap().alpha(), 255);
    }

    #[test]
    fn bad_inputs_are_errors() {
        let mut m = field();
        m.z.pop();
        let err = heatmap_svg(&m).unwrap_err();
        assert!(
            matches!(
                err,
                PlotError::LengthMismatch {
                    expected: 720,
                    found: 719,
                    ..
                }
            ),
            "{err}"
        );
        let mut m = field();
        m.y[3] = m.y[2];
        assert!(matches!(
            heatmap_svg(&m),
            Err(PlotError::NotIncreasing { index: 3, .. })
        ));
        let mut m = field();
        m.categorical = Some(vec![(0.0, "snowball".into()), (1.0, "ice free".into())]);
        assert!(matches!(
            heatmap_svg(&m),
            Err(PlotError::UnknownClass { i: 0, j: 0, .. })
        ));
        let mut m = field();
        m.overlay.push(Series::new(vec![1.0], vec![], Stroke::Solid, 0));
        assert!(matches!(heatmap_svg(&m), Err(PlotError::LengthMismatch { .. })));
    }

    #[test]
    fn categorical_map_lists_its_classes() {
        let x: Vec<f64> = (0..10).map(f64::from).collect();
        let y: Vec<f64> = (0..8).map(f64::from).collect();
        let z: Vec<f64> = x
            .iter()
            .flat_map(|&a| {
                y.iter().map(move |&b| {
                    if a + b < 6.0 {
                        0.0
                    } else if a + b < 12.0 {
                        1.0
                    } else {
                        2.0
                    }
                })
            })
            .collect();
        let m = HeatMap {
            title: "Regimes".into(),
            x,
            y,
            z,
            x_label: "a (1)".into(),
            y_label: "b (1)".into(),
            z_label: "Climate".into(),
            categorical: Some(vec![
                (0.0, "snowball".into()),
                (1.0, "ice cap".into()),
                (2.0, "ice free".into()),
            ]),
            width_px: 700,
            height_px: 500,
            ..HeatMap::default()
        };
        let svg = heatmap_svg(&m).unwrap();
        for name in ["snowball", "ice cap", "ice free", "Climate"] {
            assert!(svg.contains(&format!(">\n{name}\n<")), "missing class {name}");
        }
        let doc = roxmltree::Document::parse(&svg).unwrap();
        assert_eq!(doc.descendants().filter(|n| n.has_tag_name("image")).count(), 1);
    }
}
