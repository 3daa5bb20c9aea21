//! Forcing histories: time series of CO2, insolation multiplier and additive forcing, read from
//! a CSV (`year` plus any of `co2_ppm`, `solar_scale`, `forcing_wm2`), interpolated linearly or
//! held stepwise, and turned into the model's drivers at any time.
//!
//! The series is checked to cover the whole run when it is loaded (unless told to hold its end
//! values), so evaluation during a run never fails.

use crate::longwave::co2_forcing;
use crate::model::{DriverSource, Drivers};

/// Columns a forcing CSV may have besides `year`.
pub const COLUMNS: &[&str] = &["co2_ppm", "solar_scale", "forcing_wm2"];

/// Largest forcing file accepted, rows (refused up front beyond it).
pub const MAX_ROWS: usize = 20_000_000;

/// How values between rows are found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Interpolation {
    /// Straight line between rows.
    Linear,
    /// The value of the last row at or before the time.
    Step,
}

/// A bad forcing file: names the line and what is allowed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("line {line}: {message}")]
pub struct ForcingError {
    /// 1-based line number (0: the file as a whole).
    pub line: usize,
    /// What is wrong.
    pub message: String,
}

/// A parsed forcing history.
#[derive(Debug, Clone, PartialEq)]
pub struct ForcingSeries {
    /// Years, strictly increasing.
    pub years: Vec<f64>,
    /// Column name and values, in file order.
    pub columns: Vec<(String, Vec<f64>)>,
    /// Interpolation rule.
    pub interpolation: Interpolation,
    /// Hold end values outside the range (otherwise the range must cover the run).
    pub hold: bool,
}

impl ForcingSeries {
    /// Parse CSV text.
    pub fn parse(
        text: &str,
        interpolation: Interpolation,
        hold: bool,
    ) -> Result<ForcingSeries, ForcingError> {
        let err = |line: usize, m: String| ForcingError { line, message: m };
        let mut lines = text
            .lines()
            .enumerate()
            .map(|(i, l)| (i + 1, l.trim()))
            .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
        let (hl, header) = lines.next().ok_or_else(|| {
            err(
                0,
                "empty forcing file; expected a header such as `year,co2_ppm`".into(),
            )
        })?;
        let names: Vec<&str> = header.split(',').map(str::trim).collect();
        if names.first() != Some(&"year") {
            return Err(err(
                hl,
                format!(
                    "the first column must be `year`, found `{}`",
                    names.first().unwrap_or(&"")
                ),
            ));
        }
        if names.len() < 2 {
            return Err(err(
                hl,
                format!("no forcing columns; allowed: {}", COLUMNS.join(", ")),
            ));
        }
        for (k, n) in names.iter().enumerate().skip(1) {
            if !COLUMNS.contains(n) {
                return Err(err(
                    hl,
                    format!("unknown column `{n}`; allowed: {}", COLUMNS.join(", ")),
                ));
            }
            if names[1..k].contains(n) {
                return Err(err(hl, format!("column `{n}` appears twice")));
            }
        }
        let ncol = names.len();
        let mut years = Vec::new();
        let mut cols: Vec<Vec<f64>> = vec![Vec::new(); ncol - 1];
        for (ln, line) in lines {
            if years.len() >= MAX_ROWS {
                return Err(err(ln, format!("more than {MAX_ROWS} rows; that is the limit")));
            }
            let fields: Vec<&str> = line.split(',').map(str::trim).collect();
            if fields.len() != ncol {
                return Err(err(
                    ln,
                    format!("expected {ncol} fields ({header}), found {}", fields.len()),
                ));
            }
            for (k, f) in fields.iter().enumerate() {
                let v: f64 = f
                    .parse()
                    .map_err(|_| err(ln, format!("`{f}` in column `{}` is not a number", names[k])))?;
                if !v.is_finite() {
                    return Err(err(ln, format!("`{f}` in column `{}` is not finite", names[k])));
                }
                if k == 0 {
                    if let Some(&prev) = years.last() {
                        if v <= prev {
                            return Err(err(
                                ln,
                                format!("years must increase strictly: {v} follows {prev}"),
                            ));
                        }
                    }
                    years.push(v);
                } else {
                    let ok = match names[k] {
                        "co2_ppm" => v > 0.0,
                        "solar_scale" => v >= 0.0,
                        _ => v.abs() <= 1e4,
                    };
                    if !ok {
                        let allowed = match names[k] {
                            "co2_ppm" => "above 0",
                            "solar_scale" => "0 or more",
                            _ => "from -10000 to 10000",
                        };
                        return Err(err(
                            ln,
                            format!(
                                "{v} in column `{}` is out of range (allowed: {allowed})",
                                names[k]
                            ),
                        ));
                    }
                    cols[k - 1].push(v);
                }
            }
        }
        if years.is_empty() {
            return Err(err(hl, "no data rows after the header".into()));
        }
        Ok(ForcingSeries {
            years,
            columns: names[1..].iter().map(|s| s.to_string()).zip(cols).collect(),
            interpolation,
            hold,
        })
    }

    /// Check the series covers `[0, years]` unless it holds its end values.
    pub fn check_covers(&self, years: f64) -> Result<(), ForcingError> {
        let (a, b) = (self.years[0], *self.years.last().expect("non-empty"));
        if !self.hold && (a > 0.0 || b < years) {
            return Err(ForcingError {
                line: 0,
                message: format!(
                    "covers years {a} to {b} but the run needs 0 to {years}; extend the file or set forcing.outside = \"hold\""
                ),
            });
        }
        Ok(())
    }

    /// Value of column `k` at time `t` (years).
    pub fn value(&self, k: usize, t: f64) -> f64 {
        let y = &self.years;
        let v = &self.columns[k].1;
        let n = y.len();
        if t <= y[0] {
            return v[0];
        }
        if t >= y[n - 1] {
            return v[n - 1];
        }
        let i = y.partition_point(|&x| x <= t) - 1;
        match self.interpolation {
            Interpolation::Step => v[i],
            Interpolation::Linear => {
                let s = (t - y[i]) / (y[i + 1] - y[i]);
                v[i] + s * (v[i + 1] - v[i])
            }
        }
    }

    /// Index of a column by name.
    pub fn column(&self, name: &str) -> Option<usize> {
        self.columns.iter().position(|(n, _)| n == name)
    }
}

/// Drivers from a forcing series on top of the configured constant values.
#[derive(Debug, Clone)]
pub struct SeriesDrivers {
    /// The series.
    pub series: ForcingSeries,
    /// Configured constant drivers (used where the series has no column).
    pub base: Drivers,
    /// Configured CO2 and reference, ppm, and the log coefficient, W m-2.
    pub co2: (f64, f64, f64),
    co2_col: Option<usize>,
    solar_col: Option<usize>,
    extra_col: Option<usize>,
}

impl SeriesDrivers {
    /// Combine a series with the configured drivers.
    pub fn new(
        series: ForcingSeries,
        base: Drivers,
        co2_ppm: f64,
        reference_ppm: f64,
        log_coefficient: f64,
    ) -> SeriesDrivers {
        SeriesDrivers {
            co2_col: series.column("co2_ppm"),
            solar_col: series.column("solar_scale"),
            extra_col: series.column("forcing_wm2"),
            series,
            base,
            co2: (co2_ppm, reference_ppm, log_coefficient),
        }
    }
}

impl DriverSource for SeriesDrivers {
    fn at(&self, t: f64) -> Drivers {
        let mut d = self.base;
        if let Some(k) = self.co2_col {
            let (_, reference, coef) = self.co2;
            d.greenhouse_wm2 = co2_forcing(coef, self.series.value(k, t), reference);
        }
        if let Some(k) = self.solar_col {
            d.solar_scale = self.base.solar_scale * self.series.value(k, t);
        }
        if let Some(k) = self.extra_col {
            d.extra_wm2 = self.base.extra_wm2 + self.series.value(k, t);
        }
        d
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn linear_and_step_interpolation_and_holds() {
        let text = "year,co2_ppm,forcing_wm2\n0,280,0\n10,560,2\n20,560,-2\n";
        let lin = ForcingSeries::parse(text, Interpolation::Linear, false).unwrap();
        assert_eq!(lin.value(0, 5.0), 420.0);
        assert_eq!(lin.value(1, 15.0), 0.0);
        let st = ForcingSeries::parse(text, Interpolation::Step, true).unwrap();
        assert_eq!(st.value(0, 9.99), 280.0);
        assert_eq!(st.value(1, 25.0), -2.0);
        assert!(lin.check_covers(30.0).is_err());
        assert!(st.check_covers(30.0).is_ok());
    }

    #[test]
    fn bad_files_name_the_line() {
        for (text, line, frag) in [
            ("", 0, "empty"),
            ("year,co2_ppm\n0,280\n0,300\n", 3, "increase strictly"),
            ("year,co2_ppm\n0,nan\n", 2, "not finite"),
            ("year,co2_ppm\n0,abc\n", 2, "not a number"),
            ("year,carbon\n0,280\n", 1, "unknown column"),
            ("year,co2_ppm\n0\n", 2, "expected 2 fields"),
            ("year,co2_ppm\n", 1, "no data rows"),
            ("co2_ppm,year\n", 1, "first column"),
        ] {
            let e = ForcingSeries::parse(text, Interpolation::Linear, false).unwrap_err();
            assert_eq!(e.line, line, "{text:?}: {e}");
            assert!(e.message.contains(frag), "{text:?}: {e}");
        }
    }
}
