//! Picture quality, checked from the layout the drawing code reports (issue 19): every kind of
//! picture, drawn from real files (the gallery configs, a CO2 sweep, a seasonal globe, a bimodal
//! ensemble and a fine regime map), must keep every text inside the picture and clear of every
//! other text, put no legend over data it could have avoided, and give the classes of a map
//! colours a reader can tell apart, also in greyscale and with red-green colour blindness.
//!
//! The boxes come from `icefold::jobs::pictures::render` (the plot code records each text,
//! legend and data line as it draws), so no pixels are parsed.

use icefold::jobs::pictures::{render, Rendered};
use icefold::plot::{LayoutReport, Rect};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;

const BIN: &str = env!("CARGO_BIN_EXE_icefold");

/// Runs `icefold CMD CONFIG -o DIR/NAME.nc --set ...` and returns the file.
fn make(dir: &Path, cmd: &str, config: &str, name: &str, sets: &[&str]) -> PathBuf {
    let out = dir.join(format!("{name}.nc"));
    let mut c = Command::new(BIN);
    c.args([cmd, &format!("configs/{config}.toml"), "-o"])
        .arg(&out)
        .arg("--overwrite");
    for s in sets {
        c.args(["--set", s]);
    }
    let o = c.output().unwrap();
    assert!(
        o.status.success(),
        "{cmd} {config}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    out
}

/// Every picture of every file: (file name, picture).
fn pictures() -> &'static Vec<(String, Rendered)> {
    static ALL: OnceLock<Vec<(String, Rendered)>> = OnceLock::new();
    ALL.get_or_init(|| {
        let dir = std::env::temp_dir().join(format!("icefold-picture-quality-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        // The demo (its last tick label once stuck out of the picture).
        let o = Command::new(BIN)
            .args(["demo", "--out-dir"])
            .arg(dir.join("demo"))
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let mut files = vec![dir.join("demo").join("kessra-run.nc")];
        // The gallery configs, as scripts/make-gallery.sh runs them (a few made smaller).
        for (cmd, cfg, name, sets) in [
            ("run", "classic-step-albedo", "classic-run", &[][..]),
            (
                "equilibrium",
                "classic-step-albedo",
                "classic-equilibrium",
                &[][..],
            ),
            ("run", "smooth-albedo", "smooth-run", &[][..]),
            ("run", "gray-body", "gray-body-run", &[][..]),
            ("run", "global-mean", "global-mean-run", &[][..]),
            ("run", "emission-level-co2", "emission-level-run", &[][..]),
            ("run", "globe-with-land", "globe-land-run", &[][..]),
            ("run", "seasonal-globe", "seasonal-run", &["time.years=6"][..]),
            ("run", "forcing-orvane", "orvane-run", &[][..]),
            ("sweep", "sweep-solar", "solar-sweep", &["grid.bands=45"][..]),
            ("branches", "branches-solar", "solar-branches", &[][..]),
            ("branches", "branches-co2", "co2-branches", &[][..]),
            (
                "branches",
                "north1975-exact",
                "north1975-branches",
                &["grid.bands=60"][..],
            ),
            (
                "ensemble",
                "ensemble-lhs",
                "lhs-ensemble",
                &["ensemble.sensitivity=false"][..],
            ),
            (
                "regimes",
                "regimes-classic",
                "classic-regimes",
                &["regimes.rows=6", "grid.bands=30"][..],
            ),
            // A CO2 sweep (its control spans six decades: logarithmic axis).
            (
                "sweep",
                "branches-co2",
                "co2-sweep",
                &[
                    "sweep.control=greenhouse.co2_ppm",
                    "sweep.from=2",
                    "sweep.to=1.2e6",
                    "sweep.steps=25",
                    "grid.bands=30",
                ][..],
            ),
            // A bimodal ensemble: some members lose their cap, the others keep it.
            (
                "ensemble",
                "ensemble-lhs",
                "bimodal-ensemble",
                &[
                    "ensemble.members=24",
                    "time.years=60",
                    "ensemble.sensitivity=false",
                ][..],
            ),
            // A fine regime map (many narrow cells).
            (
                "regimes",
                "regimes-classic",
                "fine-regimes",
                &["regimes.rows=5", "regimes.columns=300", "grid.bands=30"][..],
            ),
        ] {
            files.push(make(&dir, cmd, cfg, name, sets));
        }
        let mut out = Vec::new();
        for f in &files {
            let name = f.file_stem().unwrap().to_string_lossy().into_owned();
            for p in render(f).unwrap() {
                out.push((format!("{name}-{}", p.suffix), p));
            }
        }
        std::fs::remove_dir_all(&dir).unwrap();
        out
    })
}

fn find(name: &str) -> &'static Rendered {
    &pictures()
        .iter()
        .find(|(n, _)| n == name)
        .unwrap_or_else(|| panic!("no picture {name}"))
        .1
}

/// A box shrunk by `d` on every side.
fn shrink(r: &Rect, d: f64) -> Rect {
    r.inflate(-d)
}

#[test]
fn every_kind_of_picture_is_drawn() {
    let names: Vec<&str> = pictures().iter().map(|(n, _)| n.as_str()).collect();
    for want in [
        "kessra-run-timeseries",
        "kessra-run-map",
        "kessra-run-profile",
        "classic-equilibrium-profile",
        "classic-equilibrium-spectrum",
        "solar-sweep-hysteresis",
        "co2-branches-hysteresis",
        "lhs-ensemble-spread",
        "lhs-ensemble-outcomes",
        "classic-regimes-map",
        "seasonal-run-map",
    ] {
        assert!(names.contains(&want), "{want} missing from {names:?}");
    }
}

/// Smallest distance from any text to the edge of the picture, pixels: a text that touches
/// the edge looks cut off in viewers that draw a frame or crop by a pixel (common practice).
const EDGE_CLEARANCE: f64 = 2.0;

#[test]
fn no_text_leaves_the_picture() {
    let mut bad = Vec::new();
    for (name, p) in pictures() {
        let canvas = Rect::at(0.0, 0.0, p.layout.width, p.layout.height);
        for t in &p.layout.texts {
            if !canvas.inflate(-EDGE_CLEARANCE).contains(&t.rect) {
                bad.push(format!("{name}: {:?} at {:?}", t.text, t.rect));
            }
        }
    }
    assert!(bad.is_empty(), "texts outside the picture:\n{}", bad.join("\n"));
}

#[test]
fn no_text_overlaps_another() {
    let mut bad = Vec::new();
    for (name, p) in pictures() {
        let t = &p.layout.texts;
        for i in 0..t.len() {
            for j in i + 1..t.len() {
                // Boxes are measured generously (plotters' widths run about 6 % wide), so half a
                // pixel of shrink only forgives touching edges.
                if shrink(&t[i].rect, 0.5).overlaps(&shrink(&t[j].rect, 0.5)) {
                    bad.push(format!("{name}: {:?} and {:?}", t[i].text, t[j].text));
                }
            }
        }
    }
    assert!(bad.is_empty(), "overlapping texts:\n{}", bad.join("\n"));
}

/// Points along a polyline no more than `step` pixels apart.
fn samples(line: &[(f64, f64)], step: f64) -> Vec<(f64, f64)> {
    let mut out = line.to_vec();
    for w in line.windows(2) {
        let n = ((w[1].0 - w[0].0).hypot(w[1].1 - w[0].1) / step).ceil() as usize;
        for k in 1..n {
            let t = k as f64 / n as f64;
            out.push((w[0].0 + t * (w[1].0 - w[0].0), w[0].1 + t * (w[1].1 - w[0].1)));
        }
    }
    out
}

/// Legends inside a plot area that cover data: (legend, number of data samples under it).
fn covered(l: &LayoutReport) -> Vec<(Rect, usize)> {
    let mut out = Vec::new();
    for leg in &l.legends {
        for plot in &l.plots {
            if !plot.area.overlaps(leg) {
                continue;
            }
            let inner = shrink(leg, 0.5);
            let n = plot
                .lines
                .iter()
                .flat_map(|line| samples(line, 2.0))
                .filter(|&(x, y)| x > inner.x0 && x < inner.x1 && y > inner.y0 && y < inner.y1)
                .count();
            if n > 0 {
                out.push((*leg, n));
            }
        }
    }
    out
}

#[test]
fn legends_cover_no_data() {
    // A legend that finds no free corner goes into a column beside the plots (always possible),
    // so a legend inside a plot area over data is always avoidable.
    let mut bad = Vec::new();
    for (name, p) in pictures() {
        for (r, n) in covered(&p.layout) {
            bad.push(format!("{name}: legend {r:?} covers {n} data samples"));
        }
    }
    assert!(bad.is_empty(), "{}", bad.join("\n"));
}

#[test]
fn legend_check_notices_a_legend_over_data() {
    // The check itself: a legend placed on a line must be reported.
    let mut l = find("classic-run-timeseries").layout.clone();
    let a = l.plots[0].area;
    let leg = Rect::at(a.x0 + 10.0, a.y0 + 10.0, 80.0, 30.0);
    l.plots[0]
        .lines
        .push(vec![(a.x0, a.y0 + 25.0), (a.x1, a.y0 + 25.0)]);
    l.legends.push(leg);
    assert!(covered(&l).iter().any(|(r, _)| *r == leg));
}

/// CIE L*a*b* of an sRGB colour (D65 white; IEC 61966-2-1 transfer curve and CIE 1976 formulas,
/// from memory).
fn lab((r, g, b): (u8, u8, u8)) -> [f64; 3] {
    let lin = |v: u8| {
        let v = f64::from(v) / 255.0;
        if v <= 0.04045 {
            v / 12.92
        } else {
            ((v + 0.055) / 1.055).powf(2.4)
        }
    };
    lab_of_linear([lin(r), lin(g), lin(b)])
}

fn lab_of_linear([r, g, b]: [f64; 3]) -> [f64; 3] {
    let x = 0.4124 * r + 0.3576 * g + 0.1805 * b;
    let y = 0.2126 * r + 0.7152 * g + 0.0722 * b;
    let z = 0.0193 * r + 0.1192 * g + 0.9505 * b;
    let f = |t: f64| {
        let d: f64 = 6.0 / 29.0;
        if t > d * d * d {
            t.cbrt()
        } else {
            t / (3.0 * d * d) + 4.0 / 29.0
        }
    };
    let (fx, fy, fz) = (f(x / 0.95047), f(y), f(z / 1.08883));
    [116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)]
}

/// The colour as seen with deuteranopia (Machado, Oliveira and Fernandes 2009, severity 1.0
/// matrix on linear RGB; from memory), in L*a*b*.
fn lab_deuteranope((r, g, b): (u8, u8, u8)) -> [f64; 3] {
    let lin = |v: u8| {
        let v = f64::from(v) / 255.0;
        if v <= 0.04045 {
            v / 12.92
        } else {
            ((v + 0.055) / 1.055).powf(2.4)
        }
    };
    let (r, g, b) = (lin(r), lin(g), lin(b));
    let m = [
        [0.367322, 0.860646, -0.227968],
        [0.280085, 0.672501, 0.047413],
        [-0.011820, 0.042940, 0.968881],
    ];
    let s = m.map(|row| (row[0] * r + row[1] * g + row[2] * b).clamp(0.0, 1.0));
    lab_of_linear(s)
}

fn de76(a: [f64; 3], b: [f64; 3]) -> f64 {
    ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2)).sqrt()
}

/// Smallest colour distance between two classes of a map, in colour, greyscale (L* alone) and
/// with deuteranopia; with the pair.
fn class_distances(classes: &[(String, (u8, u8, u8))]) -> [(f64, String); 3] {
    let mut best = [
        (f64::INFINITY, String::new()),
        (f64::INFINITY, String::new()),
        (f64::INFINITY, String::new()),
    ];
    for i in 0..classes.len() {
        for j in i + 1..classes.len() {
            let (a, b) = (classes[i].1, classes[j].1);
            let pair = format!("{:?} / {:?}", classes[i].0, classes[j].0);
            let d = [
                de76(lab(a), lab(b)),
                (lab(a)[0] - lab(b)[0]).abs(),
                de76(lab_deuteranope(a), lab_deuteranope(b)),
            ];
            for k in 0..3 {
                if d[k] < best[k].0 {
                    best[k] = (d[k], pair.clone());
                }
            }
        }
    }
    best
}

/// Smallest CIE76 distance between any two classes. About 2.3 is a just-noticeable
/// difference; classes of a map must be told apart at a glance, across the map, so a dozen
/// times that (common practice for categorical palettes; our choice of the exact value). Six
/// evenly spaced viridis colours, the former regime colours, come to 28.4 (two dark purples).
const MIN_DE76: f64 = 30.0;
/// Smallest L* step between classes, so that they stay apart in greyscale print (about 10 L*
/// units is a clearly visible step of grey: common practice).
const MIN_DL: f64 = 10.0;
/// Smallest CIE76 distance seen with deuteranopia (the commonest strong colour-vision
/// deficiency); lower than in full colour as the simulation compresses red-green (common
/// practice).
const MIN_DE76_DEUTERANOPE: f64 = 10.0;

#[test]
fn map_classes_are_told_apart_in_colour_greyscale_and_colour_blindness() {
    let mut maps = 0;
    for (name, p) in pictures() {
        let c = &p.layout.classes;
        if c.len() < 2 {
            continue;
        }
        maps += 1;
        let [colour, grey, deut] = class_distances(c);
        assert!(
            colour.0 >= MIN_DE76,
            "{name}: ΔE76 {:.1} for {}",
            colour.0,
            colour.1
        );
        assert!(grey.0 >= MIN_DL, "{name}: ΔL* {:.1} for {}", grey.0, grey.1);
        assert!(
            deut.0 >= MIN_DE76_DEUTERANOPE,
            "{name}: ΔE76 {:.1} with deuteranopia for {}",
            deut.0,
            deut.1
        );
    }
    assert!(maps >= 2, "the regime maps must be checked");
}

#[test]
fn colour_distance_check_rejects_the_former_viridis_classes() {
    // Six classes at evenly spaced viridis positions (the former regime colours) include two
    // dark purples closer than MIN_DE76: the check must refuse them.
    let viridis6: Vec<(String, (u8, u8, u8))> = [
        (68, 1, 84),
        (65, 68, 135),
        (42, 120, 142),
        (34, 168, 132),
        (122, 209, 81),
        (253, 231, 37),
    ]
    .iter()
    .enumerate()
    .map(|(k, c)| (format!("class {k}"), *c))
    .collect();
    let [colour, _, _] = class_distances(&viridis6);
    assert!(colour.0 < MIN_DE76, "{colour:?}");
    // Sanity of the colour conversion: white is L* = 100, black 0 (CIE 1976 definition).
    assert!((lab((255, 255, 255))[0] - 100.0).abs() < 0.01);
    assert!(lab((0, 0, 0))[0].abs() < 0.01);
}

fn texts(p: &Rendered) -> Vec<&str> {
    p.layout.texts.iter().map(|t| t.text.as_str()).collect()
}

#[test]
fn controls_spanning_decades_get_a_logarithmic_axis() {
    for name in ["co2-branches-hysteresis", "co2-sweep-hysteresis"] {
        let t = texts(find(name));
        // Powers of ten as tick labels; a linear axis from 2 to 1.2e6 ppm would show 2.0e5 steps.
        assert!(t.contains(&"10⁶") || t.contains(&"10⁵"), "{name}: {t:?}");
        assert!(!t.contains(&"2.0e5"), "{name}: {t:?}");
    }
    // A solar constant from 1200 to 1800 stays linear.
    assert!(texts(find("solar-sweep-hysteresis")).contains(&"1500"));
}

#[test]
fn corners_of_the_branch_are_not_called_folds() {
    // The CO2 branches have smooth folds near 8 and 333 ppm and corners where the cap meets
    // the pole (near 270 ppm) or the equator (near 8.7e5 ppm).
    let t = texts(find("co2-branches-hysteresis"));
    assert!(t.iter().any(|s| s.starts_with("cap meets pole")), "{t:?}");
    assert!(t.iter().any(|s| s.starts_with("cap meets equator")), "{t:?}");
    assert!(!t.iter().any(|s| s.starts_with("fold 270")), "{t:?}");
}

#[test]
fn ice_edge_is_not_drawn_along_the_frame() {
    // The demo ends ice free: its ice edge (90 °N) must leave a gap, not a line on the top frame.
    let p = find("kessra-run-map");
    let plot = &p.layout.plots[0];
    let on_top = plot
        .lines
        .iter()
        .flatten()
        .filter(|(_, y)| (y - plot.area.y0).abs() < 0.5)
        .count();
    assert_eq!(on_top, 0, "{on_top} overlay points on the 90° frame");
}

#[test]
fn seasonal_maps_and_series_show_annual_means() {
    let t = texts(find("seasonal-run-map"));
    assert!(t.contains(&"ice edge, annual mean"), "{t:?}");
    let t = texts(find("seasonal-run-timeseries"));
    assert!(t.iter().any(|s| s.ends_with("annual mean")), "{t:?}");
    assert!(t.iter().any(|s| s.ends_with("seasonal range")), "{t:?}");
}

#[test]
fn titles_are_whole_and_ensembles_say_how_members_were_chosen() {
    // The sweep's title (72 characters) used to be cut with an ellipsis.
    let t = texts(find("solar-sweep-hysteresis"));
    assert!(!t.iter().any(|s| s.contains('…')), "{t:?}");
    assert!(t.iter().any(|s| s.contains("solar constant")), "{t:?}");
    let t = texts(find("lhs-ensemble-spread"));
    assert!(t.iter().any(|s| s.contains("in sample order")), "{t:?}");
}

#[test]
fn legends_stay_inside_their_panels_when_room_can_be_made() {
    // The seasonal time series: every legend inside a plot area (a raised y range makes room).
    let l = &find("seasonal-run-timeseries").layout;
    for leg in &l.legends {
        assert!(
            l.plots.iter().any(|p| p.area.contains(leg)),
            "legend {leg:?} outside every panel"
        );
    }
}

/// Distance in pixels from `p` to the segment `a`-`b`.
fn to_segment(p: (f64, f64), a: (f64, f64), b: (f64, f64)) -> f64 {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let len2 = dx * dx + dy * dy;
    let t = if len2 > 0.0 {
        (((p.0 - a.0) * dx + (p.1 - a.1) * dy) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    (p.0 - a.0 - t * dx).hypot(p.1 - a.1 - t * dy)
}

/// Whether `p` lies inside the polygon (even-odd rule).
fn inside(p: (f64, f64), poly: &[(f64, f64)]) -> bool {
    let mut inn = false;
    for k in 0..poly.len() {
        let (a, b) = (poly[k], poly[(k + 1) % poly.len()]);
        if (a.1 > p.1) != (b.1 > p.1) && p.0 < a.0 + (p.1 - a.1) / (b.1 - a.1) * (b.0 - a.0) {
            inn = !inn;
        }
    }
    inn
}

/// How far a line may run inside the area of a class, in pixels: half a pixel, the rounding
/// of the drawn colour edge to the pixel grid (the geometry itself puts the edge on the line).
const FOLD_LINE_TOLERANCE_PX: f64 = 0.5;

/// Points of the drawn lines (two points or more: fold lines) that lie inside the area of a
/// class by more than the tolerance: a class coloured on the far side of a line that bounds it.
fn lines_through_classes(l: &LayoutReport) -> Vec<String> {
    let mut bad = Vec::new();
    for plot in &l.plots {
        for line in plot.lines.iter().filter(|l| l.len() > 1) {
            for p in samples(line, 0.5) {
                for (class, poly) in &l.regions {
                    if !inside(p, poly) {
                        continue;
                    }
                    let d = (0..poly.len())
                        .map(|k| to_segment(p, poly[k], poly[(k + 1) % poly.len()]))
                        .fold(f64::INFINITY, f64::min);
                    if d > FOLD_LINE_TOLERANCE_PX {
                        bad.push(format!(
                            "({:.1}, {:.1}) is {d:.1} px inside class {class}",
                            p.0, p.1
                        ));
                    }
                }
            }
        }
    }
    bad
}

#[test]
fn regime_colours_change_at_the_fold_lines() {
    for name in ["classic-regimes-map", "fine-regimes-map"] {
        let l = &find(name).layout;
        assert!(!l.regions.is_empty(), "{name}: no class areas reported");
        let bad = lines_through_classes(l);
        assert!(
            bad.is_empty(),
            "{name}: fold lines run through class areas at {} points, e.g.\n{}",
            bad.len(),
            bad[..bad.len().min(10)].join("\n")
        );
    }
}

#[test]
fn fold_line_check_notices_a_cell_across_a_line() {
    // A cell drawn as a square with a slanted line through it, as the map drew before.
    let mut l = LayoutReport::default();
    l.plots.push(icefold::plot::PlotData {
        area: Rect::at(0.0, 0.0, 100.0, 100.0),
        lines: vec![vec![(40.0, 0.0), (60.0, 20.0)]],
    });
    l.regions
        .push((0, vec![(30.0, 0.0), (50.0, 0.0), (50.0, 20.0), (30.0, 20.0)]));
    assert!(!lines_through_classes(&l).is_empty());
    // Cut along the line, the same cell passes.
    l.regions[0].1 = vec![(30.0, 0.0), (40.0, 0.0), (60.0, 20.0), (30.0, 20.0)];
    assert!(
        lines_through_classes(&l).is_empty(),
        "{:?}",
        lines_through_classes(&l)
    );
}

/// Whether segments a-b and p-q cross (proper intersection: touching ends do not count).
fn segments_cross(a: (f64, f64), b: (f64, f64), p: (f64, f64), q: (f64, f64)) -> bool {
    let side =
        |o: (f64, f64), u: (f64, f64), v: (f64, f64)| (u.0 - o.0) * (v.1 - o.1) - (u.1 - o.1) * (v.0 - o.0);
    side(p, q, a) * side(p, q, b) < 0.0 && side(a, b, p) * side(a, b, q) < 0.0
}

/// Leaders are reported as (marked point, end at the label box).
#[test]
fn label_leaders_do_not_cross() {
    let mut bad = Vec::new();
    let mut leaders = 0;
    for (name, p) in pictures() {
        let l = &p.layout.leaders;
        leaders += l.len();
        for (i, a) in l.iter().enumerate() {
            for b in &l[i + 1..] {
                if segments_cross(a.0, a.1, b.0, b.1) {
                    bad.push(format!("{name}: {a:?} crosses {b:?}"));
                }
                // Interleaved: a label nearer the other point than its own reads as the other
                // point's label, and the two leaders run side by side across each other's lane.
                let d = |p: (f64, f64), q: (f64, f64)| (p.0 - q.0).hypot(p.1 - q.1);
                if a.0 != b.0 && (d(a.1, b.0) < d(a.1, a.0) || d(b.1, a.0) < d(b.1, b.0)) {
                    bad.push(format!("{name}: {a:?} and {b:?} interleave"));
                }
            }
        }
    }
    assert!(leaders > 0, "no leader lines reported");
    assert!(bad.is_empty(), "crossing leaders:\n{}", bad.join("\n"));
}

#[test]
fn log_axis_labels_take_one_form() {
    for name in ["co2-branches-hysteresis", "co2-sweep-hysteresis"] {
        let t = texts(find(name));
        let powers = t.iter().any(|s| s.contains("10⁵") || s.contains("10⁶"));
        // A plain number of five digits or more beside powers of ten mixes two forms.
        let plain_big: Vec<&&str> = t
            .iter()
            .filter(|s| s.parse::<f64>().is_ok_and(|v| v >= 1e4))
            .collect();
        assert!(powers, "{name}: {t:?}");
        assert!(plain_big.is_empty(), "{name}: {plain_big:?} beside powers of ten");
    }
}
