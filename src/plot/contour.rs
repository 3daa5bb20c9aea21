//! Contour lines of a gridded field by marching squares, joined into polylines.
//!
//! The field is given at grid nodes `(x[i], y[j])` in the same layout as
//! [`HeatMap::z`](super::HeatMap::z): `z[i * y.len() + j]`. Each grid cell whose corners
//! straddle the level gets one segment (two at a saddle) between points found by linear
//! interpolation along the cell edges; a saddle is resolved by the mean of the four corners.
//! Cells with a NaN corner are skipped, which breaks the line there. Segments meet at shared
//! cell edges, so they are joined by edge identity, not by comparing coordinates.
//!
//! Reference: W. E. Lorensen and H. E. Cline (1987), "Marching cubes: a high resolution 3D
//! surface construction algorithm", Computer Graphics 21(4), 163-169 (the 2-D case).

use std::collections::HashMap;

use super::PlotError;

/// A contour line: points in data coordinates, in order. Closed lines repeat the first point
/// at the end.
pub type Polyline = Vec<(f64, f64)>;

/// A cell edge: horizontal (`along_x`, from node (i, j) to (i + 1, j)) or vertical (from
/// (i, j) to (i, j + 1)).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
struct Edge {
    along_x: bool,
    i: usize,
    j: usize,
}

/// The lines where the field equals `level`. Errors if `z` does not hold
/// `x.len() * y.len()` values.
pub fn contour_lines(x: &[f64], y: &[f64], z: &[f64], level: f64) -> Result<Vec<Polyline>, PlotError> {
    let (nx, ny) = (x.len(), y.len());
    if z.len() != nx * ny {
        return Err(PlotError::LengthMismatch {
            what: format!("contour field z ({nx} x values times {ny} y values)"),
            expected: nx * ny,
            found: z.len(),
        });
    }
    if nx < 2 || ny < 2 || !level.is_finite() {
        return Ok(Vec::new());
    }
    let at = |i: usize, j: usize| z[i * ny + j];
    let above = |v: f64| v >= level;
    // Crossing point on an edge whose two ends lie on opposite sides of the level.
    let point = |e: Edge| -> (f64, f64) {
        let (i1, j1) = if e.along_x { (e.i + 1, e.j) } else { (e.i, e.j + 1) };
        let (za, zb) = (at(e.i, e.j), at(i1, j1));
        let t = ((level - za) / (zb - za)).clamp(0.0, 1.0);
        (x[e.i] + t * (x[i1] - x[e.i]), y[e.j] + t * (y[j1] - y[e.j]))
    };

    let mut segments: Vec<(Edge, Edge)> = Vec::new();
    for i in 0..nx - 1 {
        for j in 0..ny - 1 {
            let c = [at(i, j), at(i + 1, j), at(i + 1, j + 1), at(i, j + 1)];
            if c.iter().any(|v| !v.is_finite()) {
                continue;
            }
            let b = c.map(above);
            // Edges in order bottom, right, top, left; edge k joins corners k and k + 1.
            let edges = [
                Edge { along_x: true, i, j },
                Edge {
                    along_x: false,
                    i: i + 1,
                    j,
                },
                Edge {
                    along_x: true,
                    i,
                    j: j + 1,
                },
                Edge { along_x: false, i, j },
            ];
            let cut: Vec<usize> = (0..4).filter(|&k| b[k] != b[(k + 1) % 4]).collect();
            match cut.len() {
                2 => segments.push((edges[cut[0]], edges[cut[1]])),
                4 => {
                    // Saddle: corners 0 and 2 on one side, 1 and 3 on the other. If the cell
                    // centre lies on the side of corner 0, corners 0 and 2 are joined through
                    // the middle and the lines cut off corners 1 and 3; otherwise the reverse.
                    let centre = above(0.25 * c.iter().sum::<f64>());
                    if centre == b[0] {
                        // Cut off corner 1 (edges 0, 1) and corner 3 (edges 2, 3).
                        segments.push((edges[0], edges[1]));
                        segments.push((edges[2], edges[3]));
                    } else {
                        // Cut off corner 0 (edges 3, 0) and corner 2 (edges 1, 2).
                        segments.push((edges[3], edges[0]));
                        segments.push((edges[1], edges[2]));
                    }
                }
                _ => {}
            }
        }
    }
    Ok(join(&segments)
        .into_iter()
        .map(|chain| chain.into_iter().map(point).collect())
        .collect())
}

/// Joins segments that share an edge into chains of edges: open chains first (walked from
/// an end), then closed loops (first edge repeated at the end).
fn join(segments: &[(Edge, Edge)]) -> Vec<Vec<Edge>> {
    let mut by_edge: HashMap<Edge, Vec<usize>> = HashMap::new();
    for (s, (a, b)) in segments.iter().enumerate() {
        by_edge.entry(*a).or_default().push(s);
        by_edge.entry(*b).or_default().push(s);
    }
    let mut used = vec![false; segments.len()];
    let mut chains = Vec::new();
    let walk = |start_seg: usize, start_edge: Edge, used: &mut Vec<bool>| -> Vec<Edge> {
        let mut chain = vec![start_edge];
        let (mut seg, mut at) = (start_seg, start_edge);
        loop {
            used[seg] = true;
            let (a, b) = segments[seg];
            let next = if a == at { b } else { a };
            chain.push(next);
            let Some(n) = by_edge[&next].iter().copied().find(|&s| !used[s]) else {
                break;
            };
            seg = n;
            at = next;
        }
        chain
    };
    // Ends of open chains are edges used by a single segment (the grid border or a NaN cell).
    let mut ends: Vec<(Edge, usize)> = by_edge
        .iter()
        .filter(|(_, s)| s.len() == 1)
        .map(|(e, s)| (*e, s[0]))
        .collect();
    ends.sort_by_key(|(e, _)| (e.i, e.j, e.along_x));
    for (e, s) in ends {
        if !used[s] {
            chains.push(walk(s, e, &mut used));
        }
    }
    for s in 0..segments.len() {
        if !used[s] {
            chains.push(walk(s, segments[s].0, &mut used));
        }
    }
    chains
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid(nx: usize, ny: usize, f: impl Fn(f64, f64) -> f64) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
        let x: Vec<f64> = (0..nx).map(|i| -1.0 + 2.0 * i as f64 / (nx - 1) as f64).collect();
        let y: Vec<f64> = (0..ny).map(|j| -1.0 + 2.0 * j as f64 / (ny - 1) as f64).collect();
        let mut z = Vec::with_capacity(nx * ny);
        for &xi in &x {
            for &yj in &y {
                z.push(f(xi, yj));
            }
        }
        (x, y, z)
    }

    #[test]
    fn plane_z_equals_x_gives_one_vertical_line_at_the_level() {
        // z = x is linear, so linear interpolation along edges is exact (to rounding).
        let (x, y, z) = grid(21, 13, |x, _| x);
        let lines = contour_lines(&x, &y, &z, 0.37).unwrap();
        assert_eq!(lines.len(), 1);
        let l = &lines[0];
        assert_eq!(l.len(), 13, "one point per horizontal grid line");
        assert!(l.iter().all(|p| (p.0 - 0.37).abs() < 1e-12), "{l:?}");
        let (ymin, ymax) = l.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |a, p| {
            (a.0.min(p.1), a.1.max(p.1))
        });
        assert_eq!((ymin, ymax), (-1.0, 1.0));
    }

    #[test]
    fn uneven_grid_still_exact_for_a_plane() {
        // Non-uniform spacing (like an equal-area latitude grid); z = 2x - y is linear.
        let x = vec![0.0, 0.1, 0.4, 0.5, 1.3, 2.0];
        let y = vec![-3.0, -1.0, 0.5, 0.7, 2.0];
        let mut z = Vec::new();
        for &xi in &x {
            for &yj in &y {
                z.push(2.0 * xi - yj);
            }
        }
        let lines = contour_lines(&x, &y, &z, 1.0).unwrap();
        assert_eq!(lines.len(), 1);
        for p in &lines[0] {
            assert!((2.0 * p.0 - p.1 - 1.0).abs() < 1e-12, "{p:?}");
        }
    }

    #[test]
    fn circle_is_one_closed_loop_near_the_radius() {
        let (x, y, z) = grid(81, 81, |x, y| x * x + y * y);
        let r = 0.6;
        let lines = contour_lines(&x, &y, &z, r * r).unwrap();
        assert_eq!(lines.len(), 1);
        let l = &lines[0];
        assert_eq!(l.first(), l.last(), "closed loop repeats its first point");
        // Linear interpolation of x^2 + y^2 across an edge of length h errs by at most
        // h^2 / 4 in z, i.e. about h^2 / (8 r) in radius: h = 0.025 gives 1.3e-4.
        for p in l {
            let rr = p.0.hypot(p.1);
            assert!((rr - r).abs() < 2e-4, "radius {rr} at {p:?}");
        }
    }

    #[test]
    fn nan_cells_break_the_line() {
        let (x, y, mut z) = grid(11, 11, |x, _| x);
        // Knock out a node next to the level line x = 0.05, in the middle row.
        z[5 * 11 + 5] = f64::NAN;
        let lines = contour_lines(&x, &y, &z, 0.05).unwrap();
        assert_eq!(lines.len(), 2, "{lines:?}");
        for l in &lines {
            assert!(l.iter().all(|p| (p.0 - 0.05).abs() < 1e-12));
        }
    }

    #[test]
    fn saddle_keeps_lines_apart() {
        // z = x * y at level 0.01: two hyperbola branches in opposite quadrants, never joined.
        let (x, y, z) = grid(31, 31, |x, y| x * y);
        let lines = contour_lines(&x, &y, &z, 0.01).unwrap();
        assert_eq!(lines.len(), 2);
        for l in &lines {
            let s = l[0].0.signum();
            assert!(l.iter().all(|p| p.0.signum() == s && p.1.signum() == s));
        }
    }

    #[test]
    fn wrong_length_is_an_error() {
        let err = contour_lines(&[0.0, 1.0], &[0.0, 1.0, 2.0], &[0.0; 5], 0.5).unwrap_err();
        assert!(
            matches!(
                err,
                PlotError::LengthMismatch {
                    expected: 6,
                    found: 5,
                    ..
                }
            ),
            "{err}"
        );
    }
}
