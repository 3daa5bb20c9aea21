//! All branches of equilibria in a control range: seeds from several starting climates at both
//! ends of the range (ice free, partial ice caps, snowball), each distinct branch traced once.

use super::continuation::{trace_branch, Branch, ContinuationError, ContinuationOptions};
use super::control::Controlled;
use super::{newton, NewtonOptions};
use crate::model::Model;

/// Starting climates for the seeds: `(name, mean part in C, P2 part in K)`.
pub const SEED_CLIMATES: &[(&str, f64, f64)] = &[
    ("ice free", 60.0, 0.0),
    ("warm", 15.0, -30.0),
    ("partial ice cap", 0.0, -40.0),
    ("large ice cap", -15.0, -40.0),
    ("snowball", -80.0, 0.0),
];

/// Distinct equilibria at control value `p` reached by Newton from the seed climates.
pub fn seeds(model: &Model, tolerance_wm2: f64) -> Vec<Vec<f64>> {
    let mut found: Vec<Vec<f64>> = Vec::new();
    for (_, mean_c, p2k) in SEED_CLIMATES {
        let start: Vec<f64> = model
            .grid
            .x_centres
            .iter()
            .map(|&x| mean_c + 273.15 + p2k * crate::grid::p2(x))
            .collect();
        let opts = NewtonOptions {
            tolerance_wm2,
            max_iterations: 200,
            max_change: 20.0,
        };
        if let Ok(r) = newton(model, 0.0, &start, opts) {
            if !found.iter().any(|f| max_diff(f, &r.state) < 1e-3) {
                found.push(r.state);
            }
        }
    }
    found
}

/// Largest absolute difference, K.
pub fn max_diff(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max)
}

/// Trace every branch that meets either end of the range.
pub fn all_branches(fam: &Controlled, opts: ContinuationOptions) -> Result<Vec<Branch>, ContinuationError> {
    let mut branches: Vec<Branch> = Vec::new();
    for p in [opts.from, opts.to] {
        let model = fam.model_at(p)?;
        for s in seeds(&model, opts.tolerance_wm2) {
            let known = branches.iter().any(|b| {
                b.points.iter().any(|pt| {
                    (pt.control - p).abs() <= 1e-9 * (1.0 + p.abs()) && max_diff(&pt.state, &s) < 1e-3
                })
            });
            if !known {
                branches.push(trace_branch(fam, &s, p, opts)?);
            }
        }
    }
    Ok(branches)
}
