//! Line charts: one or more panels stacked vertically over a shared x range.
//!
//! Each [`Panel`] holds series (solid or dashed lines, or point markers such as up and down
//! triangles for the two directions of a sweep), shaded bands (e.g. an ensemble's 5-95 %
//! spread), and labelled markers (e.g. the folds of a hysteresis loop). NaN values leave gaps;
//! empty series draw nothing. The legend goes into a corner of the plot area that holds no
//! data, or, when every corner is taken, into a column right of the plots; marker labels are
//! placed beside their point where they cover the least data and stay inside the frame.

use plotters::style::text_anchor::{HPos, VPos};
use plotters::style::{Color, RGBColor};

use super::canvas::{
    self, clip_polygon, clip_polyline, draw_axes, draw_legend, finite_range, finite_runs, legend_size,
    padded, Anchor, Canvas, LegendEntry, Mapping, Occupancy, PointShape, Rect, Swatch,
};
use super::style::{self, em, Sizes, BLACK, WHITE};
use super::PlotError;

/// How a series is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stroke {
    /// Solid line (e.g. a stable branch).
    Solid,
    /// Dashed line (e.g. an unstable branch).
    Dashed,
    /// Discs at the points, no line.
    Markers,
    /// Upward triangles at the points, no line (e.g. a sweep with the control rising).
    ArrowsUp,
    /// Downward triangles at the points, no line (e.g. a sweep with the control falling).
    ArrowsDown,
    /// Thin line in a pale tint of the colour (e.g. the members of an ensemble under its
    /// band and median).
    Faint,
}

impl Stroke {
    /// The legend swatch of a series drawn with this stroke in `colour`, on a `casing`
    /// colour if given (heat-map overlays); shared by line charts and heat maps.
    pub(crate) fn swatch(self, colour: RGBColor, casing: Option<RGBColor>) -> Swatch {
        match self.point_shape() {
            Some(shape) => Swatch::Point {
                colour,
                shape,
                casing,
            },
            None => Swatch::Line {
                colour: if self == Stroke::Faint {
                    style::faint(colour)
                } else {
                    colour
                },
                dashed: self == Stroke::Dashed,
                casing,
            },
        }
    }

    fn point_shape(self) -> Option<PointShape> {
        match self {
            Stroke::Solid | Stroke::Dashed | Stroke::Faint => None,
            Stroke::Markers => Some(PointShape::Disc),
            Stroke::ArrowsUp => Some(PointShape::Up),
            Stroke::ArrowsDown => Some(PointShape::Down),
        }
    }
}

/// One data series: points `(x[i], y[i])`, in data units of the panel's axes.
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    /// Legend text; `None` keeps the series out of the legend.
    pub label: Option<String>,
    /// x values.
    pub x: Vec<f64>,
    /// y values, as many as `x`.
    pub y: Vec<f64>,
    /// Line or marker style.
    pub stroke: Stroke,
    /// Palette index (see [`style::series_colour`]).
    pub colour: usize,
}

impl Series {
    /// Unlabelled series.
    pub fn new(x: Vec<f64>, y: Vec<f64>, stroke: Stroke, colour: usize) -> Series {
        Series {
            label: None,
            x,
            y,
            stroke,
            colour,
        }
    }

    /// The same series with a legend label.
    pub fn labelled(mut self, label: impl Into<String>) -> Series {
        self.label = Some(label.into());
        self
    }
}

/// A labelled point, e.g. a fold: "S0 = 1285.3".
#[derive(Debug, Clone, PartialEq)]
pub struct Marker {
    /// x position (data units).
    pub x: f64,
    /// y position (data units).
    pub y: f64,
    /// Label text.
    pub text: String,
}

/// A shaded y range at each x, e.g. the 5-95 % spread of an ensemble.
#[derive(Debug, Clone, PartialEq)]
pub struct Band {
    /// Legend text; `None` keeps the band out of the legend.
    pub label: Option<String>,
    /// x values.
    pub x: Vec<f64>,
    /// Lower edge at each x.
    pub lower: Vec<f64>,
    /// Upper edge at each x.
    pub upper: Vec<f64>,
    /// Palette index.
    pub colour: usize,
}

/// An arrow from one point to another (data units), e.g. the jump of a sweep at a tipping
/// point.
#[derive(Debug, Clone, PartialEq)]
pub struct Arrow {
    /// Tail (x, y).
    pub from: (f64, f64),
    /// Head (x, y).
    pub to: (f64, f64),
    /// Palette index.
    pub colour: usize,
}

/// One plot area with its axes.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Panel {
    /// Title above the plot area.
    pub title: Option<String>,
    /// x axis name with units, e.g. "Time (year)".
    pub x_label: String,
    /// y axis name with units, e.g. "Ice edge latitude (°N)".
    pub y_label: String,
    /// Lines and point sets, drawn in order (later ones on top).
    pub series: Vec<Series>,
    /// Labelled points.
    pub markers: Vec<Marker>,
    /// Shaded ranges, drawn beneath the series.
    pub bands: Vec<Band>,
    /// Fixed y range (lower, upper); `None` fits the data with a small margin.
    pub y_range: Option<(f64, f64)>,
    /// Fixed x range; the figure's shared x range covers the ranges of all panels that set
    /// one (else the data).
    pub x_range: Option<(f64, f64)>,
    /// Logarithmic x axis (values at or below zero are left out); the figure's shared axis
    /// is logarithmic if any panel asks for it.
    pub x_log: bool,
    /// Arrows drawn over the data.
    pub arrows: Vec<Arrow>,
    /// x spans shaded light grey over the full height (e.g. where there is ice), with the
    /// legend text of the shading.
    pub shade_x: Vec<(f64, f64)>,
    /// Legend text of the shaded spans.
    pub shade_label: Option<String>,
}

impl Panel {
    /// Empty panel with the two axis names.
    pub fn new(x_label: impl Into<String>, y_label: impl Into<String>) -> Panel {
        Panel {
            x_label: x_label.into(),
            y_label: y_label.into(),
            ..Panel::default()
        }
    }
}

/// A figure: a title and panels stacked from top to bottom sharing one x range.
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    /// Title (bold, at the top).
    pub title: String,
    /// Panels, top to bottom.
    pub panels: Vec<Panel>,
    /// Picture width in pixels (64 ..= 10000).
    pub width_px: u32,
    /// Picture height in pixels (64 ..= 10000).
    pub height_px: u32,
}

fn series_name(p: usize, s: usize, label: &Option<String>) -> String {
    match label {
        Some(l) => format!("panel {p}, series {s} (\"{l}\")"),
        None => format!("panel {p}, series {s}"),
    }
}

fn check_range(what: String, r: Option<(f64, f64)>) -> Result<(), PlotError> {
    match r {
        Some((lo, hi)) if !(lo.is_finite() && hi.is_finite() && lo < hi) => {
            Err(PlotError::BadRange { what, lo, hi })
        }
        _ => Ok(()),
    }
}

/// Checks lengths and ranges of every panel.
fn validate(fig: &Figure) -> Result<(), PlotError> {
    canvas::check_size(fig.width_px, fig.height_px)?;
    if fig.panels.is_empty() {
        return Err(PlotError::NoPanels(fig.title.clone()));
    }
    for (p, panel) in fig.panels.iter().enumerate() {
        for (s, ser) in panel.series.iter().enumerate() {
            if ser.y.len() != ser.x.len() {
                return Err(PlotError::LengthMismatch {
                    what: format!("{}: y", series_name(p, s, &ser.label)),
                    expected: ser.x.len(),
                    found: ser.y.len(),
                });
            }
        }
        for (b, band) in panel.bands.iter().enumerate() {
            for (name, v) in [("lower", &band.lower), ("upper", &band.upper)] {
                if v.len() != band.x.len() {
                    return Err(PlotError::LengthMismatch {
                        what: format!("panel {p}, band {b}: {name}"),
                        expected: band.x.len(),
                        found: v.len(),
                    });
                }
            }
        }
        check_range(format!("panel {p}: y_range"), panel.y_range)?;
    }
    Ok(())
}

/// The x values of everything in a panel.
fn panel_x(p: &Panel) -> impl Iterator<Item = &f64> {
    p.series
        .iter()
        .flat_map(|s| s.x.iter())
        .chain(p.bands.iter().flat_map(|b| b.x.iter()))
        .chain(p.markers.iter().map(|m| &m.x))
        .chain(p.x_range.iter().flat_map(|r| [&r.0, &r.1]))
}

/// Range of the y values whose x lies in `xr`.
fn panel_y_range(p: &Panel, xr: (f64, f64)) -> Option<(f64, f64)> {
    let inside = |x: f64| x >= xr.0 && x <= xr.1;
    let mut ys: Vec<f64> = Vec::new();
    for s in &p.series {
        ys.extend(s.x.iter().zip(&s.y).filter(|(x, _)| inside(**x)).map(|(_, y)| *y));
    }
    for b in &p.bands {
        for i in 0..b.x.len() {
            if inside(b.x[i]) {
                ys.push(b.lower[i]);
                ys.push(b.upper[i]);
            }
        }
    }
    ys.extend(p.markers.iter().filter(|m| inside(m.x)).map(|m| m.y));
    finite_range(&ys)
}

/// Whether a panel shows any finite data at all.
fn has_data(p: &Panel) -> bool {
    p.series
        .iter()
        .any(|s| s.x.iter().zip(&s.y).any(|(x, y)| x.is_finite() && y.is_finite()))
        || p.bands.iter().any(|b| {
            (0..b.x.len()).any(|i| b.x[i].is_finite() && b.lower[i].is_finite() && b.upper[i].is_finite())
        })
        || p.markers.iter().any(|m| m.x.is_finite() && m.y.is_finite())
}

fn legend_entries(p: &Panel) -> Vec<LegendEntry> {
    let mut out = Vec::new();
    if let (Some(l), false) = (&p.shade_label, p.shade_x.is_empty()) {
        out.push(LegendEntry {
            label: l.clone(),
            swatch: Swatch::Fill(style::SHADE.to_rgba()),
        });
    }
    for b in &p.bands {
        if let Some(l) = &b.label {
            out.push(LegendEntry {
                label: l.clone(),
                swatch: Swatch::Fill(style::with_alpha(
                    style::series_colour(b.colour),
                    style::BAND_OPACITY,
                )),
            });
        }
    }
    for s in &p.series {
        if let Some(l) = &s.label {
            let swatch = s.stroke.swatch(style::series_colour(s.colour), None);
            out.push(LegendEntry {
                label: l.clone(),
                swatch,
            });
        }
    }
    out
}

/// Geometry of one panel.
struct PanelLayout {
    map: Mapping,
    yt: (Vec<f64>, Vec<String>),
    title_y: f64,
    x_name_y: Option<f64>,
}

/// Geometry of the whole figure.
struct Layout {
    title: Vec<String>,
    panels: Vec<PanelLayout>,
    xt: (Vec<f64>, Vec<String>),
    y_name_x: f64,
    /// Left edge of the legend column right of the plots, if there is one.
    legend_column: Option<f64>,
}

fn layout(
    fig: &Figure,
    sizes: &Sizes,
    xr: (f64, f64),
    yrs: &[(f64, f64)],
    legend_column_w: f64,
) -> Result<Layout, PlotError> {
    let (w, h) = (f64::from(fig.width_px), f64::from(fig.height_px));
    let n = fig.panels.len();
    let title_lines = canvas::wrap_text(&fig.title, sizes.title, true, w - 2.0 * sizes.margin);
    let top = sizes.margin + canvas::title_height(title_lines.len(), sizes);
    let log = fig.panels.iter().any(|p| p.x_log);
    let x_ticks = |len: f64| {
        if log {
            canvas::log_ticks(xr.0, xr.1, len, sizes)
        } else {
            canvas::x_ticks(xr.0, xr.1, len, sizes)
        }
    };
    let shows_x_name: Vec<bool> = (0..n)
        .map(|i| i + 1 == n || fig.panels[i].x_label != fig.panels[i + 1].x_label)
        .collect();
    let title_h: Vec<f64> = fig
        .panels
        .iter()
        .map(|p| match &p.title {
            Some(_) => 1.6 * em(sizes.panel_title),
            None => 0.9 * em(sizes.tick),
        })
        .collect();
    let fixed: f64 = (0..n)
        .map(|i| title_h[i] + canvas::x_axis_height(shows_x_name[i], sizes))
        .sum::<f64>()
        + top
        + 0.6 * sizes.margin
        + (n as f64 - 1.0) * sizes.gap;
    let plot_h = (h - fixed) / n as f64;
    if plot_h < 4.0 * em(sizes.tick) {
        return Err(PlotError::TooSmall {
            width: fig.width_px,
            height: fig.height_px,
            panels: n,
            plot_height: plot_h,
        });
    }
    let yts: Vec<(Vec<f64>, Vec<String>)> = yrs
        .iter()
        .map(|yr| canvas::y_ticks(yr.0, yr.1, plot_h, sizes))
        .collect();
    let left = sizes.margin
        + yts
            .iter()
            .map(|yt| canvas::y_axis_width(&yt.1, true, sizes))
            .fold(0.0, f64::max);
    // Room right of the plots for half of the last x tick label.
    let mut right = w - sizes.margin - legend_column_w;
    let (_, first) = x_ticks((right - left).max(1.0));
    let widest = first
        .iter()
        .map(|s| style::text_width(s, sizes.tick, false))
        .fold(0.0, f64::max);
    if legend_column_w == 0.0 {
        // Half of the last tick label may stick out right of the plot: keep it inside the
        // picture's margin.
        right -= 0.5 * widest;
    }
    if right - left < 6.0 * em(sizes.tick) {
        return Err(PlotError::TooSmall {
            width: fig.width_px,
            height: fig.height_px,
            panels: n,
            plot_height: plot_h,
        });
    }
    let xt = x_ticks(right - left);
    let mut y = top;
    let mut panels = Vec::with_capacity(n);
    for i in 0..n {
        let title_y = y;
        y += title_h[i];
        let area = Rect::at(left, y, right - left, plot_h);
        y += plot_h;
        let x_name_y = shows_x_name[i]
            .then(|| area.y1 + sizes.tick_len + 0.5 * sizes.gap + 1.25 * em(sizes.tick) + 0.5 * sizes.gap);
        y += canvas::x_axis_height(shows_x_name[i], sizes) + sizes.gap;
        panels.push(PanelLayout {
            map: Mapping {
                area,
                x: xr,
                y: yrs[i],
            },
            yt: yts[i].clone(),
            title_y,
            x_name_y,
        });
    }
    Ok(Layout {
        title: title_lines,
        panels,
        xt,
        y_name_x: sizes.margin,
        legend_column: (legend_column_w > 0.0)
            .then_some(right + 0.5 * widest.min(2.0 * sizes.margin) + sizes.gap),
    })
}

/// A series mapped to pixels and clipped: line pieces, isolated points and markers.
struct Drawn {
    lines: Vec<Vec<(f64, f64)>>,
    dots: Vec<(f64, f64)>,
}

fn map_series(s: &Series, map: &Mapping) -> Drawn {
    let area = map.area;
    let runs = finite_runs(&s.x, &s.y);
    let mut lines = Vec::new();
    let mut dots = Vec::new();
    for run in runs {
        let px: Vec<(f64, f64)> = run.iter().map(|&(x, y)| map.px(x, y)).collect();
        if s.stroke.point_shape().is_some() || px.len() == 1 {
            dots.extend(
                px.into_iter()
                    .filter(|p| p.0 >= area.x0 && p.0 <= area.x1 && p.1 >= area.y0 && p.1 <= area.y1),
            );
        } else {
            lines.extend(clip_polyline(&px, &area));
        }
    }
    Drawn { lines, dots }
}

fn band_polygons(b: &Band, map: &Mapping) -> Vec<Vec<(f64, f64)>> {
    let mut out = Vec::new();
    let mut run: Vec<usize> = Vec::new();
    let ok = |i: usize| b.x[i].is_finite() && b.lower[i].is_finite() && b.upper[i].is_finite();
    let mut flush = |run: &mut Vec<usize>| {
        if run.len() >= 2 {
            let mut poly: Vec<(f64, f64)> = run.iter().map(|&i| map.px(b.x[i], b.upper[i])).collect();
            poly.extend(run.iter().rev().map(|&i| map.px(b.x[i], b.lower[i])));
            let clipped = clip_polygon(&poly, &map.area);
            if clipped.len() >= 3 {
                out.push(clipped);
            }
        }
        run.clear();
    };
    for i in 0..b.x.len() {
        if ok(i) {
            run.push(i);
        } else {
            flush(&mut run);
        }
    }
    flush(&mut run);
    out
}

/// Where one marker's label goes.
struct LabelSpot {
    point: (f64, f64),
    text: String,
    text_box: Rect,
    leader: bool,
}

/// Places marker labels beside their points: inside the frame, over as little data as
/// possible, clear of each other.
fn place_labels(p: &Panel, map: &Mapping, occ: &mut Occupancy, sizes: &Sizes) -> Vec<LabelSpot> {
    let ring = 1.7 * sizes.marker;
    let inner = map.area.inflate(-0.5 * sizes.gap);
    let mut spots = Vec::new();
    // Every marked point in pixels: a label nearer another marked point than its own reads as
    // that point's label (and two such leaders interleave).
    let points: Vec<(f64, f64)> = p
        .markers
        .iter()
        .filter(|m| m.x.is_finite() && m.y.is_finite())
        .map(|m| map.px(m.x, m.y))
        .collect();
    for m in &p.markers {
        if !(m.x.is_finite() && m.y.is_finite()) {
            continue;
        }
        let c = map.px(m.x, m.y);
        if !(c.0 >= map.area.x0 && c.0 <= map.area.x1 && c.1 >= map.area.y0 && c.1 <= map.area.y1) {
            continue;
        }
        let pad = 0.3 * em(sizes.annotation);
        let (w, h) = (
            style::text_width(&m.text, sizes.annotation, false) + 2.0 * pad,
            1.35 * em(sizes.annotation),
        );
        let mut best: Option<(u64, usize, Rect, bool)> = None;
        let mut order = 0;
        for (dist, leader) in [
            (ring + 0.6 * sizes.gap, false),
            (ring + 4.0 * sizes.gap, true),
            (ring + 9.0 * sizes.gap, true),
            (ring + 15.0 * sizes.gap, true),
        ] {
            let d = dist;
            let cands = [
                (c.0 + d, c.1 - d - h),       // upper right
                (c.0 - d - w, c.1 - d - h),   // upper left
                (c.0 + d, c.1 + d),           // lower right
                (c.0 - d - w, c.1 + d),       // lower left
                (c.0 + d, c.1 - 0.5 * h),     // right
                (c.0 - d - w, c.1 - 0.5 * h), // left
                (c.0 - 0.5 * w, c.1 - d - h), // above
                (c.0 - 0.5 * w, c.1 + d),     // below
            ];
            for (x, y) in cands {
                let r = Rect::at(x, y, w, h);
                order += 1;
                if !inner.contains(&r) {
                    continue;
                }
                // Never over another label, nor with a leader crossing another label's
                // leader or box.
                let lead = leader.then(|| leader_line(c, &r, ring));
                let dist = |a: (f64, f64), b: (f64, f64)| (a.0 - b.0).hypot(a.1 - b.1);
                // The label's nearest point (where a leader would end) must be nearer its own
                // point than any other, with or without a leader.
                let t = (c.0.clamp(r.x0, r.x1), c.1.clamp(r.y0, r.y1));
                let misleading = points.iter().any(|&q| q != c && dist(t, q) < dist(t, c));
                let clash = misleading
                    || spots.iter().any(|s: &LabelSpot| {
                        s.text_box.inflate(0.3 * sizes.gap).overlaps(&r)
                            || lead.is_some_and(|(a, b)| {
                                segment_hits_rect(a, b, &s.text_box)
                                    || s.leader && {
                                        let (p, q) = leader_line(s.point, &s.text_box, ring);
                                        segments_cross(a, b, p, q)
                                    }
                            })
                            || s.leader && {
                                let (p, q) = leader_line(s.point, &s.text_box, ring);
                                segment_hits_rect(p, q, &r)
                            }
                    });
                if clash {
                    continue;
                }
                let ink = occ.ink_in(&r);
                let better = match best {
                    None => true,
                    Some((bi, bo, _, _)) => (ink, order) < (bi, bo),
                };
                if better {
                    best = Some((ink, order, r, leader));
                }
            }
        }
        // No spot inside the frame (tiny plot): keep the label at upper right, clamped inside.
        let (text_box, leader) = match best {
            Some((_, _, r, l)) => (r, l),
            None => {
                let x = (c.0 + ring).min(inner.x1 - w).max(inner.x0);
                let y = (c.1 - ring - h).max(inner.y0).min(inner.y1 - h);
                (Rect::at(x, y, w, h), false)
            }
        };
        occ.mark_rect(&text_box);
        spots.push(LabelSpot {
            point: c,
            text: m.text.clone(),
            text_box,
            leader,
        });
    }
    spots
}

/// The leader from the ring around `point` to the nearest point of the label box `b`.
fn leader_line(point: (f64, f64), b: &Rect, ring: f64) -> ((f64, f64), (f64, f64)) {
    let target = (point.0.clamp(b.x0, b.x1), point.1.clamp(b.y0, b.y1));
    let (dx, dy) = (target.0 - point.0, target.1 - point.1);
    let d = dx.hypot(dy).max(1e-9);
    ((point.0 + dx / d * ring, point.1 + dy / d * ring), target)
}

/// Whether segments a-b and p-q cross (proper intersection).
fn segments_cross(a: (f64, f64), b: (f64, f64), p: (f64, f64), q: (f64, f64)) -> bool {
    let side =
        |o: (f64, f64), u: (f64, f64), v: (f64, f64)| (u.0 - o.0) * (v.1 - o.1) - (u.1 - o.1) * (v.0 - o.0);
    let (d1, d2) = (side(p, q, a), side(p, q, b));
    let (d3, d4) = (side(a, b, p), side(a, b, q));
    d1 * d2 < 0.0 && d3 * d4 < 0.0
}

/// Whether the segment a-b passes through the inside of `r`.
fn segment_hits_rect(a: (f64, f64), b: (f64, f64), r: &Rect) -> bool {
    let inner = r.inflate(-0.5);
    (0..=16).any(|k| {
        let t = f64::from(k) / 16.0;
        let (x, y) = (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1));
        x > inner.x0 && x < inner.x1 && y > inner.y0 && y < inner.y1
    })
}

/// Inside corners (and edge midpoints) to try for a legend of size `(w, h)`, best first.
fn legend_candidates(area: &Rect, (w, h): (f64, f64), inset: f64) -> Vec<Rect> {
    let (l, r) = (area.x0 + inset, area.x1 - inset - w);
    let (t, b) = (area.y0 + inset, area.y1 - inset - h);
    let (cx, cy) = (0.5 * (area.x0 + area.x1 - w), 0.5 * (area.y0 + area.y1 - h));
    [(r, t), (l, t), (r, b), (l, b), (cx, t), (cx, b), (r, cy), (l, cy)]
        .into_iter()
        .map(|(x, y)| Rect::at(x, y, w, h))
        .filter(|rc| area.contains(rc))
        .collect()
}

/// What goes where in one panel once the layout is fixed.
struct Placement {
    drawn: Vec<Drawn>,
    bands: Vec<Vec<Vec<(f64, f64)>>>,
    labels: Vec<LabelSpot>,
    /// Inside spot of the legend, or `None` if it must go outside.
    legend: Option<Rect>,
}

fn place(p: &Panel, map: &Mapping, sizes: &Sizes) -> Placement {
    let mut occ = Occupancy::new(map.area, 3.0 * sizes.line.max(1.0));
    let drawn: Vec<Drawn> = p.series.iter().map(|s| map_series(s, map)).collect();
    let bands: Vec<Vec<Vec<(f64, f64)>>> = p.bands.iter().map(|b| band_polygons(b, map)).collect();
    for d in &drawn {
        for l in &d.lines {
            occ.mark_polyline(l);
        }
        for &(x, y) in &d.dots {
            occ.mark_rect(&Rect::at(x, y, 0.0, 0.0).inflate(1.5 * sizes.marker));
        }
    }
    for polys in &bands {
        for poly in polys {
            // Mark the band's outline and fill it column by column between its x extremes.
            occ.mark_polyline(poly);
            let (x0, x1) = poly.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |a, p| {
                (a.0.min(p.0), a.1.max(p.0))
            });
            let mut x = x0;
            while x <= x1 {
                let ys: Vec<f64> = crossings(poly, x);
                for pair in ys.chunks(2) {
                    if let [a, b] = pair {
                        occ.mark_column(x, *a, *b);
                    }
                }
                x += sizes.line.max(1.0);
            }
        }
    }
    for ar in &p.arrows {
        let (t, h) = (map.px(ar.from.0, ar.from.1), map.px(ar.to.0, ar.to.1));
        if t.0.is_finite() && t.1.is_finite() && h.0.is_finite() && h.1.is_finite() {
            for l in clip_polyline(&[t, h], &map.area) {
                occ.mark_polyline(&l);
            }
        }
    }
    for m in &p.markers {
        let c = map.px(m.x, m.y);
        if c.0.is_finite() && c.1.is_finite() {
            occ.mark_rect(&Rect::at(c.0, c.1, 0.0, 0.0).inflate(2.0 * sizes.marker));
        }
    }
    let labels = place_labels(p, map, &mut occ, sizes);
    let entries = legend_entries(p);
    let legend = if entries.is_empty() {
        None
    } else {
        let size = legend_size(&entries, false, sizes);
        legend_candidates(&map.area, size, sizes.gap)
            .into_iter()
            .find(|r| occ.ink_in(&r.inflate(0.5 * sizes.gap)) == 0)
    };
    Placement {
        drawn,
        bands,
        labels,
        legend,
    }
}

/// y values where the vertical line at `x` crosses the polygon's edges, sorted.
fn crossings(poly: &[(f64, f64)], x: f64) -> Vec<f64> {
    let mut ys = Vec::new();
    for i in 0..poly.len() {
        let (a, b) = (poly[i], poly[(i + 1) % poly.len()]);
        if (a.0 <= x && x < b.0) || (b.0 <= x && x < a.0) {
            ys.push(a.1 + (b.1 - a.1) * (x - a.0) / (b.0 - a.0));
        }
    }
    ys.sort_by(f64::total_cmp);
    ys
}

/// Draws a figure and returns its SVG text (see the module doc for what goes where).
pub fn figure_svg(fig: &Figure) -> Result<String, PlotError> {
    figure_layout(fig).map(|(svg, _)| svg)
}

/// The figure with every x value replaced by its log10 (values at or below zero by NaN), for
/// a logarithmic x axis.
fn to_log_x(fig: &Figure) -> Figure {
    let l = |v: f64| if v > 0.0 { v.log10() } else { f64::NAN };
    let mut f = fig.clone();
    for p in &mut f.panels {
        for s in &mut p.series {
            s.x.iter_mut().for_each(|v| *v = l(*v));
        }
        for b in &mut p.bands {
            b.x.iter_mut().for_each(|v| *v = l(*v));
        }
        for m in &mut p.markers {
            m.x = l(m.x);
        }
        for a in &mut p.arrows {
            a.from.0 = l(a.from.0);
            a.to.0 = l(a.to.0);
        }
        for sp in &mut p.shade_x {
            *sp = (l(sp.0), l(sp.1));
        }
        p.x_range = p.x_range.map(|(a, b)| (l(a), l(b)));
    }
    f
}

/// Draws a figure and returns its SVG text and where every text, legend and data line went.
pub fn figure_layout(fig: &Figure) -> Result<(String, canvas::LayoutReport), PlotError> {
    validate(fig)?;
    style::ensure_fonts()?;
    let logged;
    let fig = if fig.panels.iter().any(|p| p.x_log) {
        logged = to_log_x(fig);
        &logged
    } else {
        fig
    };
    let sizes = Sizes::for_picture(fig.width_px, fig.height_px);
    // Shared x range: tight for lines, with a margin when points or markers could sit on
    // the frame.
    let pointy = fig
        .panels
        .iter()
        .any(|p| !p.markers.is_empty() || p.series.iter().any(|s| s.stroke.point_shape().is_some()));
    let fixed_x = finite_range(
        fig.panels
            .iter()
            .flat_map(|p| p.x_range.iter().flat_map(|r| [&r.0, &r.1])),
    );
    let xr = match fixed_x {
        Some((lo, hi)) if hi > lo => (lo, hi),
        _ => padded(
            finite_range(fig.panels.iter().flat_map(panel_x)),
            if pointy { 0.04 } else { 0.0 },
        ),
    };
    let yrs: Vec<(f64, f64)> = fig
        .panels
        .iter()
        .map(|p| p.y_range.unwrap_or_else(|| padded(panel_y_range(p, xr), 0.06)))
        .collect();

    // First try with every legend inside its plot; if one finds no free spot in a panel whose
    // y range is free, raise the top of that range so the legend's height stays clear above
    // the data, and place again; if a legend still finds no spot, make a column for legends
    // right of the plots and place again.
    let mut yrs = yrs;
    let mut lay = layout(fig, &sizes, xr, &yrs, 0.0)?;
    let mut placed: Vec<Placement> = fig
        .panels
        .iter()
        .zip(&lay.panels)
        .map(|(p, pl)| place(p, &pl.map, &sizes))
        .collect();
    let mut raised = false;
    for (i, p) in fig.panels.iter().enumerate() {
        let entries = legend_entries(p);
        if placed[i].legend.is_some() || entries.is_empty() || p.y_range.is_some() {
            continue;
        }
        let h = lay.panels[i].map.area.h();
        let room = legend_size(&entries, false, &sizes).1 + 2.5 * sizes.gap;
        if room < 0.5 * h {
            let (lo, hi) = yrs[i];
            yrs[i] = (lo, lo + (hi - lo) * h / (h - room));
            raised = true;
        }
    }
    if raised {
        lay = layout(fig, &sizes, xr, &yrs, 0.0)?;
        placed = fig
            .panels
            .iter()
            .zip(&lay.panels)
            .map(|(p, pl)| place(p, &pl.map, &sizes))
            .collect();
    }
    let needs_column = fig
        .panels
        .iter()
        .zip(&placed)
        .any(|(p, pl)| pl.legend.is_none() && !legend_entries(p).is_empty());
    if needs_column {
        let col_w = fig
            .panels
            .iter()
            .map(legend_entries)
            .filter(|e| !e.is_empty())
            .map(|e| legend_size(&e, false, &sizes).0)
            .fold(0.0, f64::max)
            + sizes.gap;
        lay = layout(fig, &sizes, xr, &yrs, col_w)?;
        placed = fig
            .panels
            .iter()
            .zip(&lay.panels)
            .map(|(p, pl)| place(p, &pl.map, &sizes))
            .collect();
    }

    canvas::draw_svg(fig.width_px, fig.height_px, &[], |c| {
        canvas::draw_title(c, &lay.title, 0.5 * f64::from(fig.width_px), sizes.margin, &sizes)?;
        for ((p, pl), placement) in fig.panels.iter().zip(&lay.panels).zip(&placed) {
            draw_panel(c, p, pl, &lay, placement, &sizes)?;
        }
        Ok(())
    })
}

fn draw_panel(
    c: &Canvas,
    p: &Panel,
    pl: &PanelLayout,
    lay: &Layout,
    placement: &Placement,
    sizes: &Sizes,
) -> Result<(), PlotError> {
    let map = &pl.map;
    let a = map.area;
    if let Some(t) = &p.title {
        c.text(
            t,
            (0.5 * (a.x0 + a.x1), pl.title_y + 0.15 * em(sizes.panel_title)),
            sizes.panel_title,
            false,
            Anchor::new(HPos::Center, VPos::Top),
            false,
            BLACK,
        )?;
    }
    // Shading, grid, then the data, then the frame and ticks on top.
    for &(x0, x1) in &p.shade_x {
        let (px0, _) = map.px(x0.min(x1), map.y.0);
        let (px1, _) = map.px(x0.max(x1), map.y.0);
        let (px0, px1) = (px0.max(a.x0), px1.min(a.x1));
        if px0.is_finite() && px1.is_finite() && px1 > px0 {
            c.fill_rect(
                Rect {
                    x0: px0,
                    y0: a.y0,
                    x1: px1,
                    y1: a.y1,
                },
                style::SHADE.to_rgba(),
            )?;
        }
    }
    canvas::draw_grid(c, map, &lay.xt.0, &pl.yt.0, sizes)?;
    let mut data = canvas::PlotData {
        area: a,
        lines: Vec::new(),
    };
    for d in &placement.drawn {
        data.lines.extend(d.lines.iter().cloned());
        data.lines.extend(d.dots.iter().map(|&p| vec![p]));
    }
    for polys in &placement.bands {
        for poly in polys {
            let mut closed = poly.clone();
            closed.push(poly[0]);
            data.lines.push(closed);
        }
    }
    for (band, polys) in p.bands.iter().zip(&placement.bands) {
        let colour = style::with_alpha(style::series_colour(band.colour), style::BAND_OPACITY);
        for poly in polys {
            c.polygon(poly, colour)?;
        }
    }
    for (s, d) in p.series.iter().zip(&placement.drawn) {
        let colour = style::series_colour(s.colour).to_rgba();
        for l in &d.lines {
            match s.stroke {
                Stroke::Dashed => c.dashed(l, colour, sizes.line, sizes.dash)?,
                Stroke::Faint => c.line(
                    l,
                    style::faint(style::series_colour(s.colour)).to_rgba(),
                    0.35 * sizes.line,
                )?,
                _ => c.line(l, colour, sizes.line)?,
            }
        }
        let (shape, r) = match s.stroke.point_shape() {
            Some(shape) => (shape, sizes.marker),
            // Isolated points of a line (NaN on both sides) as small dots.
            None => (PointShape::Disc, 0.75 * sizes.line),
        };
        for &pt in &d.dots {
            c.point(shape, pt, r, colour)?;
        }
    }
    for ar in &p.arrows {
        let (t, h) = (map.px(ar.from.0, ar.from.1), map.px(ar.to.0, ar.to.1));
        if !(t.0.is_finite() && t.1.is_finite() && h.0.is_finite() && h.1.is_finite()) {
            continue;
        }
        let colour = style::series_colour(ar.colour).to_rgba();
        let (dx, dy) = (h.0 - t.0, h.1 - t.1);
        let len = dx.hypot(dy);
        if len < 1.0 {
            continue;
        }
        let (ux, uy) = (dx / len, dy / len);
        let head = (4.0 * sizes.marker).min(0.5 * len);
        let base = (h.0 - ux * head, h.1 - uy * head);
        let pieces = clip_polyline(&[t, base], &a);
        for l in &pieces {
            c.line(l, colour, 0.8 * sizes.line)?;
            data.lines.push(l.clone());
        }
        let w = 0.45 * head;
        let tri = [
            h,
            (base.0 - uy * w, base.1 + ux * w),
            (base.0 + uy * w, base.1 - ux * w),
        ];
        if tri
            .iter()
            .all(|q| a.inflate(0.5).contains(&Rect::at(q.0, q.1, 0.0, 0.0)))
        {
            c.polygon(&tri, colour)?;
        }
    }
    for spot in &placement.labels {
        data.lines.push(vec![spot.point]);
    }
    c.note_plot(data);
    if !has_data(p) {
        c.text(
            "no data",
            (0.5 * (a.x0 + a.x1), 0.5 * (a.y0 + a.y1)),
            sizes.axis_label,
            false,
            Anchor::new(HPos::Center, VPos::Center),
            false,
            RGBColor(120, 120, 120),
        )?;
    }
    draw_axes(
        c,
        map,
        &lay.xt,
        &pl.yt,
        pl.x_name_y.map(|y| (p.x_label.as_str(), y)),
        Some((p.y_label.as_str(), lay.y_name_x)),
        sizes,
    )?;
    for spot in &placement.labels {
        let ring = 1.7 * sizes.marker;
        c.ring(spot.point, ring, WHITE.to_rgba(), 2.6 * sizes.frame)?;
        c.ring(spot.point, ring, BLACK.to_rgba(), 1.3 * sizes.frame)?;
        c.point(PointShape::Disc, spot.point, 0.55 * sizes.marker, BLACK.to_rgba())?;
        let b = spot.text_box;
        if spot.leader {
            let (start, target) = leader_line(spot.point, &b, ring);
            c.line(&[start, target], BLACK.to_rgba(), sizes.frame)?;
            c.note_leader(spot.point, target);
        }
        c.fill_rect(b, WHITE.mix(0.85))?;
        c.text(
            &spot.text,
            (0.5 * (b.x0 + b.x1), 0.5 * (b.y0 + b.y1)),
            sizes.annotation,
            false,
            Anchor::new(HPos::Center, VPos::Center),
            false,
            BLACK,
        )?;
    }
    let entries = legend_entries(p);
    if !entries.is_empty() {
        let origin = match (placement.legend, lay.legend_column) {
            (Some(r), _) => Some(((r.x0, r.y0), true)),
            (None, Some(x)) => Some(((x, a.y0), false)),
            (None, None) => None,
        };
        if let Some((o, framed)) = origin {
            draw_legend(c, &entries, o, false, framed, sizes)?;
        }
    }
    Ok(())
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::plot::render::svg_to_pixmap;

    /// A hysteresis-like test figure: an S-shaped curve with stable and unstable parts.
    pub(crate) fn s_curve_figure() -> Figure {
        // x = y^3 - y parametrised by y: folds at y = ±1/sqrt(3).
        let ys: Vec<f64> = (0..=120).map(|i| -1.5 + 3.0 * f64::from(i) / 120.0).collect();
        let fold = 1.0 / 3f64.sqrt();
        let split = |keep: &dyn Fn(f64) -> bool| -> (Vec<f64>, Vec<f64>) {
            ys.iter()
                .map(|&y| {
                    if keep(y) {
                        (y * y * y - y, y)
                    } else {
                        (f64::NAN, f64::NAN)
                    }
                })
                .unzip()
        };
        let (xs, ysb) = split(&|y: f64| y.abs() >= fold - 1e-12);
        let (xu, yu) = split(&|y: f64| y.abs() <= fold + 1e-12);
        let xf = fold * fold * fold - fold;
        let mut panel = Panel::new("Control (W m⁻²)", "Temperature (K)");
        panel.title = Some("Branches".into());
        panel
            .series
            .push(Series::new(xs, ysb, Stroke::Solid, 0).labelled("stable"));
        panel
            .series
            .push(Series::new(xu, yu, Stroke::Dashed, 1).labelled("unstable"));
        panel.markers.push(Marker {
            x: xf,
            y: fold,
            text: format!("fold x = {xf:.3}"),
        });
        panel.markers.push(Marker {
            x: -xf,
            y: -fold,
            text: format!("fold x = {:.3}", -xf),
        });
        Figure {
            title: "Test hysteresis °N".into(),
            panels: vec![panel],
            width_px: 900,
            height_px: 600,
        }
    }

    fn texts(svg: &str) -> Vec<String> {
        let doc = roxmltree::Document::parse(svg).expect("SVG must be well-formed XML");
        doc.descendants()
            .filter(|n| n.has_tag_name("text"))
            .map(|n| n.text().unwrap_or("").trim().to_string())
            .collect()
    }

    #[test]
    fn svg_is_xml_with_title_axis_names_and_legend() {
        let svg = figure_svg(&s_curve_figure()).unwrap();
        let t = texts(&svg);
        for want in [
            "Test hysteresis °N",
            "Control (W m⁻²)",
            "Temperature (K)",
            "stable",
            "unstable",
            "Branches",
        ] {
            assert!(t.iter().any(|s| s == want), "missing text {want:?} in {t:?}");
        }
        assert!(t.iter().any(|s| s.starts_with("fold x = ")));
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let root = doc.root_element();
        assert_eq!(root.attribute("width"), Some("900"));
        assert_eq!(root.attribute("viewBox"), Some("0 0 9000 6000"));
    }

    #[test]
    fn png_has_the_requested_size_and_visible_title() {
        let fig = s_curve_figure();
        let svg = figure_svg(&fig).unwrap();
        let pm = svg_to_pixmap(&svg).unwrap();
        assert_eq!((pm.width(), pm.height()), (fig.width_px, fig.height_px));
        // Title band: top 40 px of the centre half. A 21 px bold title leaves hundreds of dark
        // pixels there; with no font resvg would leave it blank.
        let mut dark = 0;
        for y in 0..40 {
            for x in 225..675 {
                let p = pm.pixel(x, y).unwrap().demultiply();
                if u32::from(p.red()) + u32::from(p.green()) + u32::from(p.blue()) < 300 {
                    dark += 1;
                }
            }
        }
        assert!(dark > 400, "only {dark} dark pixels in the title area");
    }

    #[test]
    fn dashed_series_is_drawn_as_many_dashes() {
        let svg = figure_svg(&s_curve_figure()).unwrap();
        // The unstable branch (palette colour 1) becomes many short polylines.
        let c1 = style::series_colour(1);
        let hex = format!("#{:02X}{:02X}{:02X}", c1.0, c1.1, c1.2);
        let dashes = svg.matches(&format!("stroke=\"{hex}\"")).count();
        assert!(dashes > 10, "only {dashes} dash pieces");
    }

    #[test]
    fn mismatched_lengths_are_reported_with_the_series() {
        let mut fig = s_curve_figure();
        fig.panels[0]
            .series
            .push(Series::new(vec![1.0, 2.0, 3.0], vec![1.0, 2.0], Stroke::Solid, 2).labelled("short"));
        let err = figure_svg(&fig).unwrap_err();
        match &err {
            PlotError::LengthMismatch {
                what,
                expected,
                found,
            } => {
                assert_eq!((*expected, *found), (3, 2));
                assert!(what.contains("series 2") && what.contains("short"), "{what}");
            }
            other => panic!("unexpected error {other}"),
        }
        assert_eq!(
            err.to_string(),
            "panel 0, series 2 (\"short\"): y: expected 3 values, got 2"
        );
        let mut fig = s_curve_figure();
        fig.panels[0].bands.push(Band {
            label: None,
            x: vec![0.0, 1.0],
            lower: vec![0.0],
            upper: vec![1.0, 2.0],
            colour: 0,
        });
        assert!(matches!(figure_svg(&fig), Err(PlotError::LengthMismatch { .. })));
    }

    #[test]
    fn bad_ranges_sizes_and_empty_figures_are_errors() {
        let mut fig = s_curve_figure();
        fig.panels[0].y_range = Some((2.0, 1.0));
        assert!(matches!(figure_svg(&fig), Err(PlotError::BadRange { .. })));
        let mut fig = s_curve_figure();
        fig.width_px = 10;
        assert!(matches!(figure_svg(&fig), Err(PlotError::BadSize { .. })));
        let mut fig = s_curve_figure();
        fig.panels.clear();
        assert!(matches!(figure_svg(&fig), Err(PlotError::NoPanels(_))));
        let mut fig = s_curve_figure();
        fig.height_px = 64;
        assert!(matches!(figure_svg(&fig), Err(PlotError::TooSmall { .. })));
    }

    #[test]
    fn empty_and_all_nan_series_still_draw_axes() {
        let mut p = Panel::new("Time (year)", "Temperature (K)");
        p.series
            .push(Series::new(vec![], vec![], Stroke::Solid, 0).labelled("empty"));
        p.series.push(Series::new(
            vec![1.0, 2.0],
            vec![f64::NAN, f64::NAN],
            Stroke::Dashed,
            1,
        ));
        let fig = Figure {
            title: "Nothing".into(),
            panels: vec![p],
            width_px: 400,
            height_px: 300,
        };
        let svg = figure_svg(&fig).unwrap();
        let t = texts(&svg);
        assert!(t.iter().any(|s| s == "no data"), "{t:?}");
        assert!(t.iter().any(|s| s == "Time (year)"));
    }

    #[test]
    fn nan_leaves_a_gap_in_a_line() {
        let x: Vec<f64> = (0..10).map(f64::from).collect();
        let mut y = x.clone();
        y[5] = f64::NAN;
        let map = Mapping {
            area: Rect::at(0.0, 0.0, 100.0, 100.0),
            x: (0.0, 9.0),
            y: (0.0, 9.0),
        };
        let d = map_series(&Series::new(x, y, Stroke::Solid, 0), &map);
        assert_eq!(d.lines.len(), 2);
        assert_eq!((d.lines[0].len(), d.lines[1].len()), (5, 4));
    }

    #[test]
    fn legend_avoids_the_data_and_labels_stay_inside_the_frame() {
        let fig = s_curve_figure();
        let sizes = Sizes::for_picture(fig.width_px, fig.height_px);
        style::ensure_fonts().unwrap();
        let xr = padded(finite_range(panel_x(&fig.panels[0])), 0.04);
        let yr = padded(panel_y_range(&fig.panels[0], xr), 0.06);
        let lay = layout(&fig, &sizes, xr, &[yr], 0.0).unwrap();
        let map = &lay.panels[0].map;
        let pl = place(&fig.panels[0], map, &sizes);
        // The S curve leaves the upper-left and lower-right corners free.
        let legend = pl.legend.expect("a free corner exists");
        let (lw, lh) = legend_size(&legend_entries(&fig.panels[0]), false, &sizes);
        assert!((legend.w() - lw).abs() < 1e-9 && (legend.h() - lh).abs() < 1e-9);
        for s in &fig.panels[0].series {
            for (x, y) in s.x.iter().zip(&s.y).filter(|(x, _)| x.is_finite()) {
                let (px, py) = map.px(*x, *y);
                assert!(
                    !(px > legend.x0 && px < legend.x1 && py > legend.y0 && py < legend.y1),
                    "data point ({x}, {y}) under the legend"
                );
            }
        }
        assert_eq!(pl.labels.len(), 2);
        for l in &pl.labels {
            assert!(
                map.area.contains(&l.text_box),
                "label box {:?} outside {:?}",
                l.text_box,
                map.area
            );
            assert!(!l.text_box.overlaps(&legend));
        }
        assert!(!pl.labels[0].text_box.overlaps(&pl.labels[1].text_box));
    }

    #[test]
    fn crowded_panel_puts_the_legend_outside() {
        // Lines through every corner: no inside spot is free.
        let mut p = Panel::new("x (1)", "y (1)");
        p.series
            .push(Series::new(vec![0.0, 1.0], vec![0.0, 1.0], Stroke::Solid, 0).labelled("rising"));
        p.series
            .push(Series::new(vec![0.0, 1.0], vec![1.0, 0.0], Stroke::Solid, 1).labelled("falling"));
        p.series
            .push(Series::new(vec![0.0, 1.0], vec![0.5, 0.5], Stroke::Dashed, 2).labelled("flat"));
        p.series
            .push(Series::new(vec![0.5, 0.5], vec![0.0, 1.0], Stroke::Dashed, 3).labelled("upright"));
        let fig = Figure {
            title: "Crowded".into(),
            panels: vec![p],
            width_px: 800,
            height_px: 500,
        };
        let sizes = Sizes::for_picture(800, 500);
        style::ensure_fonts().unwrap();
        let lay = layout(&fig, &sizes, (0.0, 1.0), &[padded(Some((0.0, 1.0)), 0.06)], 0.0).unwrap();
        assert!(place(&fig.panels[0], &lay.panels[0].map, &sizes).legend.is_none());
        let svg = figure_svg(&fig).unwrap();
        assert!(texts(&svg).iter().any(|s| s == "upright"));
    }
}
