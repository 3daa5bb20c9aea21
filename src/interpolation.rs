//! Cubic Hermite interpolation on one interval (shared by the OLR table and the time stepper's
//! dense output).
//!
//! Reference: de Boor, A Practical Guide to Splines (2001), chapter IV.

/// Basis weights `[h00, h10, h01, h11]` at `s` in `[0, 1]`: the interpolant on `[x0, x0 + h]`
/// is `h00 y0 + h10 h d0 + h01 y1 + h11 h d1`.
#[inline]
pub fn hermite_basis(s: f64) -> [f64; 4] {
    let s2 = s * s;
    let s3 = s2 * s;
    [
        2.0 * s3 - 3.0 * s2 + 1.0,
        s3 - 2.0 * s2 + s,
        -2.0 * s3 + 3.0 * s2,
        s3 - s2,
    ]
}

/// Value and derivative of the cubic Hermite interpolant on an interval of length `h` with end
/// values `y0`, `y1` and end slopes `d0`, `d1`, at fraction `s` of the interval.
#[inline]
pub fn hermite(y0: f64, y1: f64, d0: f64, d1: f64, h: f64, s: f64) -> (f64, f64) {
    let [h00, h10, h01, h11] = hermite_basis(s);
    let v = h00 * y0 + h10 * h * d0 + h01 * y1 + h11 * h * d1;
    let s2 = s * s;
    let dv =
        (6.0 * s2 - 6.0 * s) * (y0 - y1) / h + (3.0 * s2 - 4.0 * s + 1.0) * d0 + (3.0 * s2 - 2.0 * s) * d1;
    (v, dv)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reproduces_a_cubic_and_its_slope() {
        // A cubic is its own Hermite interpolant (common practice).
        let f = |x: f64| 2.0 * x * x * x - x * x + 3.0 * x - 1.0;
        let df = |x: f64| 6.0 * x * x - 2.0 * x + 3.0;
        let (a, h) = (0.5, 1.5);
        for k in 0..=10 {
            let s = k as f64 / 10.0;
            let (v, dv) = hermite(f(a), f(a + h), df(a), df(a + h), h, s);
            assert!((v - f(a + s * h)).abs() < 1e-12);
            assert!((dv - df(a + s * h)).abs() < 1e-11);
        }
    }
}
