//! Gauss-Legendre quadrature with end-point clustering, for integrands with kinks or
//! square-root behaviour at the ends of each piece (polar circles, poles).

/// 24-point Gauss-Legendre nodes on `[-1, 1]` (positive half; the rule is symmetric).
/// Reference: Abramowitz and Stegun (1964), table 25.4 (values recomputed by Newton iteration
/// on `P24`, see `gauss_legendre_nodes`).
fn gauss_legendre_nodes(n: usize) -> (Vec<f64>, Vec<f64>) {
    // Newton iteration on P_n with the Chebyshev-like initial guess (common practice,
    // e.g. Press et al., Numerical Recipes, `gauleg`).
    let mut nodes = vec![0.0; n];
    let mut weights = vec![0.0; n];
    let m = n.div_ceil(2);
    for i in 0..m {
        let mut z = (std::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
        let mut dp = 0.0;
        for _ in 0..100 {
            let (mut p1, mut p2) = (1.0, 0.0);
            for j in 0..n {
                let p3 = p2;
                p2 = p1;
                p1 = ((2 * j + 1) as f64 * z * p2 - j as f64 * p3) / (j + 1) as f64;
            }
            dp = n as f64 * (z * p1 - p2) / (z * z - 1.0);
            let z1 = z;
            z = z1 - p1 / dp;
            if (z - z1).abs() < 1e-15 {
                break;
            }
        }
        nodes[i] = -z;
        nodes[n - 1 - i] = z;
        let w = 2.0 / ((1.0 - z * z) * dp * dp);
        weights[i] = w;
        weights[n - 1 - i] = w;
    }
    (nodes, weights)
}

/// A reusable quadrature rule on `[0, 1]` with nodes clustered at both ends by the map
/// `u = (1 - cos(pi s)) / 2`, which turns `sqrt(u)` end behaviour into a smooth integrand.
#[derive(Debug, Clone)]
pub struct ClusteredRule {
    /// Nodes in `[0, 1]`.
    pub nodes: Vec<f64>,
    /// Weights (sum to 1), including the Jacobian of the map.
    pub weights: Vec<f64>,
}

impl ClusteredRule {
    /// A rule with `n` Gauss-Legendre points.
    pub fn new(n: usize) -> ClusteredRule {
        let (z, w) = gauss_legendre_nodes(n);
        let pi = std::f64::consts::PI;
        let mut nodes = Vec::with_capacity(n);
        let mut weights = Vec::with_capacity(n);
        for (zi, wi) in z.iter().zip(&w) {
            let s = 0.5 * (zi + 1.0);
            nodes.push(0.5 * (1.0 - (pi * s).cos()));
            // du/ds = pi/2 sin(pi s); ds = dz/2.
            weights.push(0.5 * wi * 0.5 * pi * (pi * s).sin());
        }
        ClusteredRule { nodes, weights }
    }

    /// Integral of `f` over `[a, b]`.
    pub fn integrate(&self, a: f64, b: f64, mut f: impl FnMut(f64) -> f64) -> f64 {
        let h = b - a;
        let mut s = 0.0;
        for (u, w) in self.nodes.iter().zip(&self.weights) {
            s += w * f(a + h * u);
        }
        s * h
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn integrates_polynomials_and_sqrt_ends() {
        let r = ClusteredRule::new(24);
        // Exact values (calculus): int_0^1 x^5 = 1/6; int_0^1 sqrt(x(1-x)) = pi/8.
        assert_relative_eq!(r.integrate(0.0, 1.0, |x| x.powi(5)), 1.0 / 6.0, epsilon = 1e-12);
        assert_relative_eq!(
            r.integrate(0.0, 1.0, |x| (x * (1.0 - x)).sqrt()),
            std::f64::consts::PI / 8.0,
            epsilon = 1e-12
        );
    }
}
