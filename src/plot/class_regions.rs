//! Where the colours of a categorical map change when lines of known class change (e.g. the
//! fold lines of a regime map) run through it: each row is cut at the lines themselves, not at
//! the cell edges, so no colour of a class shows on the wrong side of its line.
//!
//! A row of cells becomes runs of one class. Between two runs the boundary is the cell edge,
//! unless one of the given lines crosses the row's centre between the two cell centres: then
//! the boundary follows that line across the row's band. Two or more lines between the same
//! two cells enclose a class no cell sampled: that gap is left uncoloured.

/// A boundary across a row band: (y, x) points with y increasing from the band's bottom to
/// its top.
type Boundary = Vec<(f64, f64)>;

/// One row cut into runs: run `k` has class `classes[k]` (`None`: uncoloured) and lies
/// between `bounds[k]` and `bounds[k + 1]`.
pub struct RowRuns {
    /// Bottom and top of the row's band (data units).
    pub band: (f64, f64),
    classes: Vec<Option<usize>>,
    bounds: Vec<Boundary>,
}

/// x of a boundary at height `y` (linear between its points, constant beyond them).
fn x_at(b: &Boundary, y: f64) -> f64 {
    if y <= b[0].0 {
        return b[0].1;
    }
    for w in b.windows(2) {
        if y <= w[1].0 {
            let t = if w[1].0 > w[0].0 {
                (y - w[0].0) / (w[1].0 - w[0].0)
            } else {
                1.0
            };
            return w[0].1 + t * (w[1].1 - w[0].1);
        }
    }
    b[b.len() - 1].1
}

/// Points of `line` walked from the crossing `(x0, y0)` on segment `s` toward `limit` in y
/// (up when `limit > y0`), while y keeps moving that way; the last point is cut at `limit`.
fn walk(line: &[(f64, f64)], s: usize, (x0, y0): (f64, f64), limit: f64) -> Vec<(f64, f64)> {
    let up = limit > y0;
    let ahead = |y: f64, last: f64| if up { y > last } else { y < last };
    let mut best: Vec<(f64, f64)> = Vec::new();
    // Try both directions along the line; keep the one that moves toward the limit.
    for forward in [true, false] {
        let mut out = Vec::new();
        let mut last = y0;
        let mut idx: Vec<usize> = if forward {
            (s + 1..line.len()).collect()
        } else {
            (0..=s).rev().collect()
        };
        idx.retain(|&i| line[i] != (x0, y0));
        for i in idx {
            let (x, y) = line[i];
            if !ahead(y, last) {
                break;
            }
            let past = if up { y >= limit } else { y <= limit };
            if past {
                let (px, py) = out.last().copied().unwrap_or((x0, y0));
                let t = (limit - py) / (y - py);
                out.push((px + t * (x - px), limit));
                break;
            }
            out.push((x, y));
            last = y;
        }
        if out.len() > best.len() {
            best = out;
        }
    }
    best
}

/// The boundary that follows `line` through the crossing `(x0, y0)` on segment `s` across the
/// band `(lo, hi)`; beyond the line's ends it goes straight up or down.
fn follow(line: &[(f64, f64)], s: usize, p: (f64, f64), (lo, hi): (f64, f64)) -> Boundary {
    let mut b: Boundary = walk(line, s, p, lo)
        .into_iter()
        .map(|(x, y)| (y, x))
        .rev()
        .collect();
    if b.first().is_none_or(|q| q.0 > lo) {
        let x = b.first().map_or(p.0, |q| q.1);
        b.insert(0, (lo, x));
    }
    b.push((p.1, p.0));
    b.extend(walk(line, s, p, hi).into_iter().map(|(x, y)| (y, x)));
    if b[b.len() - 1].0 < hi {
        let x = b[b.len() - 1].1;
        b.push((hi, x));
    }
    b
}

/// Crossings of the lines with the height `y`: (x, line index, segment index), by x.
fn crossings(lines: &[Vec<(f64, f64)>], y: f64) -> Vec<(f64, usize, usize)> {
    let mut out: Vec<(f64, usize, usize)> = Vec::new();
    for (l, line) in lines.iter().enumerate() {
        let mut mine: Vec<(f64, usize, usize)> = Vec::new();
        for (s, w) in line.windows(2).enumerate() {
            let ((xa, ya), (xb, yb)) = (w[0], w[1]);
            if ya == yb || y < ya.min(yb) || y > ya.max(yb) {
                continue;
            }
            let x = xa + (y - ya) / (yb - ya) * (xb - xa);
            // A vertex on the row's centre ends one segment and starts the next: count once.
            if !mine.iter().any(|c| (c.0 - x).abs() <= 1e-12 * x.abs().max(1.0)) {
                mine.push((x, l, s));
            }
        }
        out.extend(mine);
    }
    out.sort_by(|a, b| a.0.total_cmp(&b.0));
    out
}

/// Vertical boundary at `x` across the band.
fn straight(x: f64, (lo, hi): (f64, f64)) -> Boundary {
    vec![(lo, x), (hi, x)]
}

/// Runs of every row: `class[i * ny + j]` is the class of cell (i, j), `xc`/`yc` the cell
/// centres, `xe`/`ye` the cell edges, `lines` the lines along which the class changes.
pub fn row_runs(
    class: &[Option<usize>],
    (xc, yc): (&[f64], &[f64]),
    (xe, ye): (&[f64], &[f64]),
    lines: &[Vec<(f64, f64)>],
) -> Vec<RowRuns> {
    let ny = yc.len();
    (0..ny)
        .map(|j| {
            let band = (ye[j], ye[j + 1]);
            let cross = crossings(lines, yc[j]);
            let mut classes = vec![class[j]];
            let mut bounds = vec![straight(xe[0], band)];
            for i in 1..xc.len() {
                let (a, b) = (class[(i - 1) * ny + j], class[i * ny + j]);
                if a == b {
                    continue;
                }
                let here: Vec<&(f64, usize, usize)> =
                    cross.iter().filter(|c| c.0 > xc[i - 1] && c.0 <= xc[i]).collect();
                let at = |c: &(f64, usize, usize)| follow(&lines[c.1], c.2, (c.0, yc[j]), band);
                match here.as_slice() {
                    [] => bounds.push(straight(xe[i], band)),
                    [c] => bounds.push(at(c)),
                    [first, .., last] => {
                        bounds.push(at(first));
                        classes.push(None);
                        bounds.push(at(last));
                    }
                }
                classes.push(b);
            }
            bounds.push(straight(xe[xe.len() - 1], band));
            RowRuns {
                band,
                classes,
                bounds,
            }
        })
        .collect()
}

impl RowRuns {
    /// Left edges of the runs at height `y`, plus the right end: each at least the one before
    /// (a boundary that a slanted line overtakes leaves its run empty there).
    fn edges_at(&self, y: f64, out: &mut Vec<f64>) {
        out.clear();
        let mut m = f64::NEG_INFINITY;
        for b in &self.bounds {
            m = m.max(x_at(b, y));
            out.push(m);
        }
    }

    /// Class at `(x, y)` for y inside the band, using `scratch` for the run edges.
    pub fn class_at(&self, x: f64, y: f64, scratch: &mut Vec<f64>) -> Option<usize> {
        self.edges_at(y, scratch);
        let k = scratch[1..].partition_point(|e| *e <= x);
        self.classes.get(k.min(self.classes.len() - 1)).copied().flatten()
    }

    /// Each coloured run as a polygon (class, points in data units), exact: sampled at every
    /// boundary point and at every height where two boundaries cross.
    pub fn polygons(&self) -> Vec<(usize, Vec<(f64, f64)>)> {
        let mut ys: Vec<f64> = self.bounds.iter().flatten().map(|p| p.0).collect();
        ys.sort_by(f64::total_cmp);
        ys.dedup();
        let mut all = ys.clone();
        for w in ys.windows(2) {
            for (a, ba) in self.bounds.iter().enumerate() {
                for bb in &self.bounds[a + 1..] {
                    let d0 = x_at(ba, w[0]) - x_at(bb, w[0]);
                    let d1 = x_at(ba, w[1]) - x_at(bb, w[1]);
                    if d0 * d1 < 0.0 {
                        all.push(w[0] + d0 / (d0 - d1) * (w[1] - w[0]));
                    }
                }
            }
        }
        all.sort_by(f64::total_cmp);
        all.dedup();
        let mut e = Vec::new();
        let edges: Vec<Vec<f64>> = all
            .iter()
            .map(|&y| {
                self.edges_at(y, &mut e);
                e.clone()
            })
            .collect();
        let mut out = Vec::new();
        for (k, c) in self.classes.iter().enumerate() {
            let Some(c) = c else { continue };
            let mut poly: Vec<(f64, f64)> = all.iter().zip(&edges).map(|(&y, e)| (e[k], y)).collect();
            poly.extend(all.iter().zip(&edges).rev().map(|(&y, e)| (e[k + 1], y)));
            out.push((*c, poly));
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_slanted_line_splits_the_row_along_itself() {
        // Two cells per row, classes 0 | 1, a line from (0.2, -1) to (1.8, 1) through the row
        // centre y = 0 at x = 1.0, between the cell centres 0.5 and 1.5.
        let runs = row_runs(
            &[Some(0), Some(1)],
            (&[0.5, 1.5], &[0.0]),
            (&[0.0, 1.0, 2.0], &[-0.5, 0.5]),
            &[vec![(0.2, -1.0), (1.8, 1.0)]],
        );
        let mut s = Vec::new();
        // At the band's top the line is at x = 1.4; at its bottom at 0.6.
        assert_eq!(runs[0].class_at(1.35, 0.5, &mut s), Some(0));
        assert_eq!(runs[0].class_at(0.65, -0.5, &mut s), Some(1));
        let p = runs[0].polygons();
        assert_eq!(p.len(), 2);
        assert!(p[0].1.iter().any(|&(x, y)| (x - 1.4).abs() < 1e-12 && y == 0.5));
    }
}
