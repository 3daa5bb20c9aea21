//! Time integration: the linearly implicit Rosenbrock scheme (the default, for stiff grids and
//! long runs) and the explicit Dormand-Prince schemes of `ode_solvers` (cross-checks, coarse
//! grids), behind one `Integrator` trait, plus the run driver that owns the output cadence.

pub mod driver;
pub mod explicit;
pub mod rosenbrock;

pub use driver::{run, Observer, RunSummary};
pub use rosenbrock::Ros2;

use crate::model::Model;

/// Counters of an integration.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Stats {
    /// Accepted steps.
    pub steps: u64,
    /// Rejected steps.
    pub rejected: u64,
    /// Right-hand-side evaluations.
    pub rhs_evals: u64,
    /// Matrix factorisations.
    pub factorisations: u64,
}

/// A numerical failure during integration; the message names the model time and, where it
/// applies, the latitude and the value (exit status 3).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SolverError {
    /// NaN or infinity in the state.
    #[error("numerical blow-up at model year {t:.6}: temperature {} at latitude {lat:.2} degrees (band {band})", kelvin(*.value))]
    NonFinite {
        /// Model time, years.
        t: f64,
        /// Band index.
        band: usize,
        /// Band-centre latitude, degrees.
        lat: f64,
        /// The value.
        value: f64,
    },
    /// A temperature left the model's valid range.
    #[error("temperature {} K at latitude {lat:.2} degrees (band {band}) at model year {t:.6} is outside the valid range {lo} K to {hi} K{hint}", kelvin(*.value))]
    OutOfRange {
        /// Model time, years.
        t: f64,
        /// Band index.
        band: usize,
        /// Latitude, degrees.
        lat: f64,
        /// The value, K.
        value: f64,
        /// Lower limit, K.
        lo: f64,
        /// Upper limit, K.
        hi: f64,
        /// Extra advice.
        hint: String,
    },
    /// The adaptive step size collapsed; names the band changing fastest there.
    #[error(
        "step size collapsed to {h:e} years at model year {t:.6}; fastest-changing band {band} at latitude {lat:.2} degrees: temperature {} K changing at {rate:.3e} K per year (the problem may be unstable: check transport.diffusivity and the OLR, or use time.method = \"implicit\")",
        kelvin(*.value)
    )]
    StepCollapsed {
        /// Model time, years.
        t: f64,
        /// Step, years.
        h: f64,
        /// Band index.
        band: usize,
        /// Latitude, degrees.
        lat: f64,
        /// Temperature there, K.
        value: f64,
        /// Its rate of change, K per year.
        rate: f64,
    },
    /// An explicit scheme detected stiffness; names the band changing fastest there.
    #[error("{method} detected stiffness at model year {t:.4} (fastest-changing band {band} at latitude {lat:.2} degrees: temperature {} K changing at {rate:.3e} K per year); use time.method = \"implicit\" (made for stiff grids), or set time.stiffness_check = false to force it on", kelvin(*.value))]
    Stiff {
        /// Scheme name.
        method: &'static str,
        /// Model time, years.
        t: f64,
        /// Band index.
        band: usize,
        /// Latitude, degrees.
        lat: f64,
        /// Temperature there, K.
        value: f64,
        /// Its rate of change, K per year.
        rate: f64,
    },
    /// The step limit was reached.
    #[error("more than {limit} steps needed by model year {t:.4} (time.max_steps)")]
    TooManySteps {
        /// Model time, years.
        t: f64,
        /// Step limit.
        limit: u64,
    },
    /// Newton or another iteration did not converge.
    #[error("{what} did not converge: {detail}")]
    NoConvergence {
        /// What failed.
        what: String,
        /// Details with values.
        detail: String,
    },
}

/// Check a state after a step: finite, and inside the model's valid range.
pub fn check_state(model: &Model, t: f64, temps: &[f64]) -> Result<(), SolverError> {
    check_state_inline(model, t, temps)
}

/// [`check_state`] inlined into a time-stepping kernel: one branch-free pass decides, and only
/// a failing state is searched band by band.
#[inline(always)]
pub(crate) fn check_state_inline(model: &Model, t: f64, temps: &[f64]) -> Result<(), SolverError> {
    let (lo, hi) = model.valid_range();
    // NaN fails both comparisons; the range is finite, so infinities fail one.
    if temps.iter().fold(true, |ok, &v| ok & (v >= lo) & (v <= hi)) {
        return Ok(());
    }
    check_state_slow(model, t, temps, lo, hi)
}

#[cold]
fn check_state_slow(model: &Model, t: f64, temps: &[f64], lo: f64, hi: f64) -> Result<(), SolverError> {
    for (band, &v) in temps.iter().enumerate() {
        if !v.is_finite() || v < lo || v > hi {
            let lat = band_latitude(model, band);
            if !v.is_finite() {
                return Err(SolverError::NonFinite {
                    t,
                    band,
                    lat,
                    value: v,
                });
            }
            let hint = if model.longwave.valid_range().is_some() {
                " (the OLR table's range narrows it)".to_string()
            } else {
                String::new()
            };
            return Err(SolverError::OutOfRange {
                t,
                band,
                lat,
                value: v,
                lo,
                hi,
                hint,
            });
        }
    }
    Ok(())
}

/// A temperature for a message: three decimals, or scientific notation when huge.
pub fn kelvin(v: f64) -> String {
    if v.is_finite() && v.abs() >= 1e6 {
        format!("{v:.3e}")
    } else {
        format!("{v:.3}")
    }
}

/// Latitude of band `band`'s centre, degrees.
pub fn band_latitude(model: &Model, band: usize) -> f64 {
    model.grid.x_centres[band].asin().to_degrees()
}

/// Index of the largest `|v|` (the first NaN wins: it is the worst), for messages.
pub fn worst_index(values: &[f64]) -> usize {
    let mut best = 0;
    for (i, v) in values.iter().enumerate() {
        if v.is_nan() {
            return i;
        }
        if v.abs() > values[best].abs() {
            best = i;
        }
    }
    best
}

/// A step collapse at `t` (years) with step `h` (years), naming the band of largest rate
/// `rates` (K per year) at the state `temps` (K).
pub fn step_collapsed(model: &Model, t: f64, h: f64, temps: &[f64], rates: &[f64]) -> SolverError {
    let band = worst_index(rates);
    SolverError::StepCollapsed {
        t,
        h,
        band,
        lat: band_latitude(model, band),
        value: temps[band],
        rate: rates[band],
    }
}

/// A time integrator that can be advanced to any later time.
pub trait Integrator {
    /// Advance to `t_target` (years, not before the current output time) and write the state
    /// there into `out`.
    fn advance_to(&mut self, t_target: f64, out: &mut [f64]) -> Result<(), SolverError>;
    /// Counters so far.
    fn stats(&self) -> Stats;
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_worst_band_is_the_largest_or_the_first_nan() {
        assert_eq!(worst_index(&[1.0, -5.0, 3.0]), 1);
        assert_eq!(worst_index(&[1.0, f64::INFINITY, f64::NAN, 9.0]), 2);
        assert_eq!(worst_index(&[f64::NAN, f64::NAN]), 0);
    }

    #[test]
    fn messages_name_time_latitude_and_value() {
        let e = SolverError::StepCollapsed {
            t: 12.5,
            h: 1e-13,
            band: 3,
            lat: -41.25,
            value: 2.5e20,
            rate: -7.0e9,
        }
        .to_string();
        for frag in [
            "model year 12.500000",
            "band 3",
            "latitude -41.25 degrees",
            "2.500e20 K",
            "-7.000e9 K per year",
        ] {
            assert!(e.contains(frag), "{frag}: {e}");
        }
        assert_eq!(kelvin(288.14159), "288.142");
        assert_eq!(kelvin(f64::NAN), "NaN");
    }
}
