//! The regime map: which climates exist over two control parameters.
//!
//! Each row holds the second parameter fixed; continuation along the first (all branches, as
//! `icefold branches` traces them) gives every equilibrium and fold of the row. At each cell
//! (a value of the first parameter) the equilibria are where a branch crosses that value; each
//! is counted, classed by its northern ice-edge latitude (see [`Kind`]) and called stable when
//! the leading eigenvalue, interpolated along the branch, is negative. Along a segment that
//! ends at a fold the stability of its other end is used (it changes only at the fold,
//! Cahalan and North 1979, J. Atmos. Sci. 36). The folds of neighbouring rows are joined into
//! fold lines (tipping lines) in the plane of the two parameters.

use super::branches::all_branches;
use super::continuation::{Branch, ContinuationError, ContinuationOptions};
use super::control::Controlled;

/// Default ice-edge latitude (degrees north) at and above which a partial ice cap counts as
/// small (`regimes.small_cap_min_latitude_deg`). A naming convention, not a bifurcation.
pub const SMALL_CAP_MIN_LATITUDE: f64 = crate::config::spec::DEFAULT_SMALL_CAP_MIN_LATITUDE;

/// Edge latitudes within this of 90 (or 0) degrees count as ice free (or snowball), degrees.
const EDGE_END_TOLERANCE: f64 = 1e-6;

/// Steepest fold line followed: between neighbouring rows a fold line may move, in the first
/// parameter as a fraction of its range and in ice edge `x = sin(latitude)`, at most this many
/// times the rows' step as a fraction of the rows' range (a line that crosses the whole map
/// within a fifth of the rows' range is not followed); with 21 rows that is a quarter of the
/// range per row.
const LINK_SLOPE: f64 = 5.0;

/// The kinds of climate, by northern ice-edge latitude `phi` (degrees north).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Kind {
    /// No ice in the northern hemisphere: `phi` = 90.
    IceFree,
    /// A polar cap reaching down to `SMALL_CAP_MIN_LATITUDE <= phi < 90`.
    SmallCap,
    /// A cap reaching equatorward of `SMALL_CAP_MIN_LATITUDE`: `0 < phi < 60`.
    LargeCap,
    /// Ice everywhere: `phi` = 0.
    Snowball,
    /// Not symmetric about the equator (globe): on a branch that left a symmetric one at a
    /// branch point, whatever its edges (e.g. one hemisphere ice free, the other capped).
    Asymmetric,
}

impl Kind {
    /// Every kind, in the order of their flag bits.
    pub const ALL: [Kind; 5] = [
        Kind::IceFree,
        Kind::SmallCap,
        Kind::LargeCap,
        Kind::Snowball,
        Kind::Asymmetric,
    ];

    /// The kind of an equilibrium with northern ice edge at `phi` degrees north, small and
    /// large caps split at the default [`SMALL_CAP_MIN_LATITUDE`].
    pub fn of_edge(phi: f64) -> Kind {
        Kind::of_edge_split(phi, SMALL_CAP_MIN_LATITUDE)
    }

    /// The kind of an equilibrium with northern ice edge at `phi` degrees north, caps with
    /// their edge at or poleward of `split` degrees north counting as small.
    pub fn of_edge_split(phi: f64, split: f64) -> Kind {
        if phi >= 90.0 - EDGE_END_TOLERANCE {
            Kind::IceFree
        } else if phi <= EDGE_END_TOLERANCE {
            Kind::Snowball
        } else if phi >= split {
            Kind::SmallCap
        } else {
            Kind::LargeCap
        }
    }

    /// Flag bit of the kind (1, 2, 4, 8, 16).
    pub fn bit(self) -> u8 {
        1 << (self as u8)
    }

    /// Name used in files and legends (`ice_free`, `small_cap`, `large_cap`, `snowball`).
    pub fn name(self) -> &'static str {
        match self {
            Kind::IceFree => "ice_free",
            Kind::SmallCap => "small_cap",
            Kind::LargeCap => "large_cap",
            Kind::Snowball => "snowball",
            Kind::Asymmetric => "asymmetric",
        }
    }

    /// One-line definition, for file attributes and documentation; `split` is the small/large
    /// cap split latitude, degrees north.
    pub fn definition(self, split: f64) -> String {
        match self {
            Kind::IceFree => "ice_free: northern ice edge at 90 degrees north (no ice)".into(),
            Kind::SmallCap => format!(
                "small_cap: ice edge at or poleward of {split} degrees north, below 90"
            ),
            Kind::LargeCap => {
                format!("large_cap: ice edge equatorward of {split} degrees north, above 0")
            }
            Kind::Snowball => "snowball: ice edge at 0 degrees (ice everywhere)".into(),
            Kind::Asymmetric => {
                "asymmetric: not symmetric about the equator (globe; an asymmetric branch or its mirror image, each counted)"
                    .into()
            }
        }
    }
}

/// A fold found in one row.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RowFold {
    /// Value of the first parameter at the fold.
    pub control: f64,
    /// Northern ice-edge latitude at the fold, degrees north.
    pub ice_edge: f64,
    /// Whether the fold sits at a corner of the piecewise-smooth curve.
    pub corner: bool,
    /// Whether the first parameter has a minimum at the fold (the branch exists above it).
    pub minimum: bool,
}

/// One row of the map (one value of the second parameter).
#[derive(Debug, Clone, PartialEq)]
pub struct RegimeRow {
    /// Value of the second parameter.
    pub row_value: f64,
    /// Stable equilibria per column.
    pub stable: Vec<u32>,
    /// All equilibria (stable and unstable) per column.
    pub equilibria: Vec<u32>,
    /// Kinds of the stable equilibria per column, as a sum of [`Kind::bit`].
    pub kinds: Vec<u8>,
    /// Folds of the row, ordered by ice edge, then control.
    pub folds: Vec<RowFold>,
    /// Number of branches traced.
    pub branches: usize,
    /// Branch ends where the corrector failed at ever smaller steps ("stuck"): the row's
    /// equilibria and folds beyond them are missing (0 for a complete row).
    pub stuck_ends: usize,
    /// Linearisations used by the continuation.
    pub linearisations: u64,
}

/// A vertex of a branch polyline, folds included.
#[derive(Debug, Clone, Copy)]
struct Vertex {
    p: f64,
    edge: f64,
    leading: f64,
    fold: bool,
}

/// Branch points with their located folds inserted in arclength order.
fn vertices(branch: &Branch, edge: &dyn Fn(&[f64], f64) -> f64) -> Vec<Vertex> {
    let mut out = Vec::with_capacity(branch.points.len() + branch.folds.len());
    let mut folds = branch.folds.iter().peekable();
    for (i, pt) in branch.points.iter().enumerate() {
        let v = Vertex {
            p: pt.control,
            edge: edge(&pt.state, pt.control),
            leading: pt.leading,
            fold: false,
        };
        // A repeated point (a leg landing exactly on its start) would count twice.
        let repeated = out
            .last()
            .is_some_and(|u: &Vertex| u.p == v.p && u.edge == v.edge && !u.fold);
        if !repeated {
            out.push(v);
        }
        while let Some(f) = folds.next_if(|f| f.after_point == i) {
            out.push(Vertex {
                p: f.control,
                edge: edge(&f.state, f.control),
                leading: 0.0,
                fold: true,
            });
        }
    }
    out
}

/// The kind at fraction `f` of the segment from `a` to `z`: the ice edge interpolated, except
/// that a segment between a fold and an ice-free (or snowball) point lies on the ice-free (or
/// snowball) piece whole: a corner fold's edge, located to the fold tolerance, sits a hair
/// short of 90 (or 0) degrees, and interpolating it would name an ice-free state a small cap.
fn segment_kind(a: Vertex, z: Vertex, f: f64, split: f64) -> Kind {
    let end_kind = |v: Vertex| match Kind::of_edge_split(v.edge, split) {
        k @ (Kind::IceFree | Kind::Snowball) if !v.fold => Some(k),
        _ => None,
    };
    let whole = match (a.fold, z.fold) {
        (true, false) => end_kind(z),
        (false, true) => end_kind(a),
        _ => None,
    };
    whole.unwrap_or_else(|| Kind::of_edge_split(a.edge + f * (z.edge - a.edge), split))
}

/// Count and class the equilibria of `branches` at each value of `columns`.
///
/// `edge(state, p)` is the northern ice-edge latitude (degrees) of `state` at control `p`;
/// caps with their edge at or poleward of `split` (degrees north) count as small.
/// Each segment counts a column value in `[low end, high end)`, and the branch's last
/// point also at its own value, so a value is counted once per crossing.
pub fn classify(
    branches: &[Branch],
    columns: &[f64],
    edge: &dyn Fn(&[f64], f64) -> f64,
    split: f64,
) -> (Vec<u32>, Vec<u32>, Vec<u8>) {
    let n = columns.len();
    let (mut stable, mut all, mut kinds) = (vec![0u32; n], vec![0u32; n], vec![0u8; n]);
    for b in branches {
        let v = vertices(b, edge);
        for (k, w) in v.windows(2).enumerate() {
            let (a, z) = (w[0], w[1]);
            let (lo, hi) = (a.p.min(z.p), a.p.max(z.p));
            let last = k + 2 == v.len();
            for (i, &c) in columns.iter().enumerate() {
                let inside = (lo <= c && c < hi) || (last && c == z.p) || (k == 0 && a.p == hi && c == hi);
                if !inside {
                    continue;
                }
                let f = if z.p == a.p { 0.0 } else { (c - a.p) / (z.p - a.p) };
                let is_stable = match (a.fold, z.fold) {
                    (true, false) => z.leading < 0.0,
                    (false, true) => a.leading < 0.0,
                    _ => a.leading + f * (z.leading - a.leading) < 0.0,
                };
                all[i] += 1;
                if is_stable {
                    stable[i] += 1;
                    kinds[i] |= segment_kind(a, z, f, split).bit();
                }
            }
        }
    }
    (stable, all, kinds)
}

/// Trace every branch of the family `fam` over `opts`' range and class the equilibria at
/// `columns`, small and large caps split at `split` degrees north. `row_value` is only
/// recorded.
pub fn regime_row(
    fam: &Controlled,
    opts: ContinuationOptions,
    columns: &[f64],
    row_value: f64,
    split: f64,
) -> Result<RegimeRow, ContinuationError> {
    let set = all_branches(fam, opts)?;
    // A branch that ends stuck leaves this row's map incomplete beyond that control: say so
    // (and the row records how many ends did).
    let mut stuck_ends = 0;
    for b in &set.branches {
        for e in b.ends {
            if let super::continuation::LegEnd::Stuck { control } = e {
                stuck_ends += 1;
                eprintln!(
                    "icefold: warning: in the map row at {row_value}, a branch continued in {} ends stuck at {control} (the corrector failed at ever smaller steps); its equilibria and folds beyond are missing from the map",
                    fam.key
                );
            }
        }
    }
    // The ice edge depends on the control only through the albedo keys (the freezing
    // temperature moves the edge) or, with the edge-balance rule of relaxation transport,
    // through the insolation, OLR and rate too; otherwise the base model serves every point.
    let varies = fam.key.starts_with("albedo.") || fam.base_model().uses_edge_balance();
    let base = fam.base_model().clone();
    let edge = |state: &[f64], p: f64| -> f64 {
        if varies {
            if let Ok(m) = fam.model_at(p) {
                return m.ice_edges(state).0;
            }
        }
        base.ice_edges(state).0
    };
    let (sym, asym) = set.branches.split_at(set.asymmetric_from);
    let (mut stable, mut equilibria, mut kinds) = classify(sym, columns, &edge, split);
    // Asymmetric equilibria are a kind of their own whatever their edges.
    let (s2, e2, k2) = classify(asym, columns, &edge, split);
    for i in 0..columns.len() {
        stable[i] += s2[i];
        equilibria[i] += e2[i];
        if k2[i] != 0 {
            kinds[i] |= Kind::Asymmetric.bit();
        }
    }
    let mut folds: Vec<RowFold> = set
        .branches
        .iter()
        .flat_map(|b| b.folds.iter())
        .map(|f| RowFold {
            control: f.control,
            ice_edge: edge(&f.state, f.control),
            corner: f.corner,
            minimum: f.minimum,
        })
        .collect();
    folds.sort_by(|a, b| {
        a.ice_edge
            .total_cmp(&b.ice_edge)
            .then(a.control.total_cmp(&b.control))
    });
    Ok(RegimeRow {
        row_value,
        stable,
        equilibria,
        kinds,
        folds,
        branches: set.branches.len(),
        stuck_ends,
        linearisations: set.linearisations,
    })
}

/// A vertex of a fold line.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FoldVertex {
    /// First parameter.
    pub p1: f64,
    /// Second parameter (the row's value).
    pub p2: f64,
    /// Northern ice-edge latitude at the fold, degrees north.
    pub ice_edge: f64,
    /// Whether the fold sits at a corner of the piecewise-smooth curve.
    pub corner: bool,
}

/// Which fold a fold line follows: a minimum or a maximum of the first parameter, at the
/// snowball end (edge 0), the ice-free end (edge 90) or in between.
fn fold_type(f: &FoldVertex, minimum: bool) -> (bool, i8) {
    // In x = sin(latitude): a corner fold sits within round-off of 0 or 1 in x, which is
    // up to a few 0.001 degrees of latitude at the pole.
    let x = f.ice_edge.to_radians().sin();
    let end = if x <= 1e-6 {
        -1
    } else if x >= 1.0 - 1e-6 {
        1
    } else {
        0
    };
    (minimum, end)
}

/// Join the folds of successive rows into lines. Between neighbouring rows a fold is linked to
/// a line only when it is of the line's type ([`fold_type`]) and moved by at most
/// `LINK_SLOPE` times the rows' relative step in the first parameter (over `p1_span`) and in
/// ice edge `x` (plus `edge_slack`, the jitter of a fold within its cluster of sub-band
/// wiggles: give two band widths); the closest pairs are linked first. A fold left over starts
/// a new line. Deterministic for a given input.
pub fn fold_lines(rows: &[RegimeRow], p1_span: f64, edge_slack: f64) -> Vec<Vec<FoldVertex>> {
    let mut lines: Vec<Vec<FoldVertex>> = Vec::new();
    let mut types: Vec<(bool, i8)> = Vec::new();
    let mut open: Vec<usize> = Vec::new();
    let p2_span = match (rows.first(), rows.last()) {
        (Some(a), Some(b)) => (b.row_value - a.row_value).abs(),
        _ => 0.0,
    };
    let sin = |lat: f64| lat.to_radians().sin();
    let mut prev_value = f64::NAN;
    for row in rows {
        let verts: Vec<(FoldVertex, (bool, i8))> = row
            .folds
            .iter()
            .map(|f| {
                let v = FoldVertex {
                    p1: f.control,
                    p2: row.row_value,
                    ice_edge: f.ice_edge,
                    corner: f.corner,
                };
                (v, fold_type(&v, f.minimum))
            })
            .collect();
        let step = if p2_span > 0.0 {
            (row.row_value - prev_value).abs() / p2_span
        } else {
            0.0
        };
        prev_value = row.row_value;
        let reach = LINK_SLOPE * step;
        let mut pairs: Vec<(f64, usize, usize)> = Vec::new();
        for (li, &l) in open.iter().enumerate() {
            let Some(last) = lines[l].last() else { continue };
            for (fi, (v, ty)) in verts.iter().enumerate() {
                if *ty != types[l] {
                    continue;
                }
                let dp = (v.p1 - last.p1).abs() / p1_span;
                let dx = (sin(v.ice_edge) - sin(last.ice_edge)).abs();
                if dp <= reach && dx <= reach + edge_slack {
                    pairs.push((dp + dx, li, fi));
                }
            }
        }
        pairs.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)).then(a.2.cmp(&b.2)));
        let (mut line_used, mut fold_used) = (vec![false; open.len()], vec![false; verts.len()]);
        let mut next_open = Vec::new();
        for (_, li, fi) in pairs {
            if !line_used[li] && !fold_used[fi] {
                line_used[li] = true;
                fold_used[fi] = true;
                lines[open[li]].push(verts[fi].0);
                next_open.push(open[li]);
            }
        }
        for (fi, (v, ty)) in verts.iter().enumerate() {
            if !fold_used[fi] {
                lines.push(vec![*v]);
                types.push(*ty);
                next_open.push(lines.len() - 1);
            }
        }
        next_open.sort_unstable();
        open = next_open;
    }
    lines
}

/// The computed map.
#[derive(Debug, Clone, PartialEq)]
pub struct RegimeMap {
    /// Values of `regimes.control` (columns).
    pub columns: Vec<f64>,
    /// One entry per value of `regimes.row_control`, in order.
    pub rows: Vec<RegimeRow>,
    /// Fold lines in the (control, row_control) plane.
    pub lines: Vec<Vec<FoldVertex>>,
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A stable segment from a corner fold (where the cap meets the pole, located a hair
    /// short of 90 degrees) to an ice-free point is ice free, not a small cap; the same at the
    /// equator for the snowball. Interpolating the edge named it a small cap (one cell of the
    /// classic map at D = 0.425, S0 = 1385 W m-2 lost its ice-free class).
    #[test]
    fn a_segment_from_a_corner_fold_to_an_ice_free_point_is_ice_free() {
        let v = |edge: f64, fold: bool| Vertex {
            p: 0.0,
            edge,
            leading: -1.0,
            fold,
        };
        let corner = v(90.0 - 1e-4, true);
        let free = v(90.0, false);
        for f in [0.0, 0.3, 0.999] {
            assert_eq!(segment_kind(corner, free, f, 60.0), Kind::IceFree);
            assert_eq!(segment_kind(free, corner, f, 60.0), Kind::IceFree);
            assert_eq!(
                segment_kind(v(1e-4, true), v(0.0, false), f, 60.0),
                Kind::Snowball
            );
        }
        // Elsewhere the edge is interpolated.
        assert_eq!(segment_kind(v(89.0, false), free, 0.5, 60.0), Kind::SmallCap);
        assert_eq!(segment_kind(corner, v(89.8, false), 0.5, 60.0), Kind::SmallCap);
        assert_eq!(
            segment_kind(v(50.0, false), v(70.0, false), 0.4, 60.0),
            Kind::LargeCap
        );
        assert_eq!(
            segment_kind(v(50.0, false), v(70.0, false), 0.4, 55.0),
            Kind::SmallCap
        );
    }

    #[test]
    fn kinds_follow_the_edge_thresholds() {
        assert_eq!(Kind::of_edge(90.0), Kind::IceFree);
        assert_eq!(Kind::of_edge(89.9), Kind::SmallCap);
        assert_eq!(Kind::of_edge(60.0), Kind::SmallCap);
        assert_eq!(Kind::of_edge(59.9), Kind::LargeCap);
        assert_eq!(Kind::of_edge(0.0), Kind::Snowball);
        let bits: Vec<u8> = Kind::ALL.iter().map(|k| k.bit()).collect();
        assert_eq!(bits, [1, 2, 4, 8, 16]);
    }

    fn row(v: f64, folds: &[(f64, f64)]) -> RegimeRow {
        RegimeRow {
            row_value: v,
            stable: vec![],
            equilibria: vec![],
            kinds: vec![],
            folds: folds
                .iter()
                .map(|&(c, e)| RowFold {
                    control: c,
                    ice_edge: e,
                    corner: false,
                    minimum: false,
                })
                .collect(),
            branches: 0,
            stuck_ends: 0,
            linearisations: 0,
        }
    }

    #[test]
    fn folds_of_neighbouring_rows_join_by_nearness() {
        // Two lines drifting apart, then one ends and a new one appears far away.
        // Rows 3 to 20 hold no folds: they set the rows' range (a step is 1/20 of it).
        let mut rows = vec![
            row(0.0, &[(10.0, 30.0), (20.0, 80.0)]),
            row(1.0, &[(11.0, 31.0), (21.0, 81.0)]),
            row(2.0, &[(12.0, 32.0), (90.0, 5.0)]),
        ];
        rows.extend((3..=20).map(|v| row(v as f64, &[])));
        let lines = fold_lines(&rows, 100.0, 0.01);
        assert_eq!(lines.len(), 3);
        assert_eq!(
            lines[0].iter().map(|v| v.p1).collect::<Vec<_>>(),
            [10.0, 11.0, 12.0]
        );
        assert_eq!(lines[1].iter().map(|v| v.p1).collect::<Vec<_>>(), [20.0, 21.0]);
        assert_eq!(lines[2].iter().map(|v| v.p2).collect::<Vec<_>>(), [2.0]);
    }
}
