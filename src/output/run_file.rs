//! The file of `icefold run`: fixed names of DESIGN section 4 plus the energy budget and the
//! drivers actually applied, streamed record by record (memory flat in run length).

use super::common::{attrs, create_file, mark_complete, write_latitude, write_provenance, Provenance};
use super::OutputError;
use super::{Attr, NcWriter};
use crate::ensemble::stats::Ols;
use crate::grid::Domain;
use crate::integrate::Observer;
use crate::model::{Model, Workspace};
use std::path::Path;

/// Streams a run to a netCDF-4/HDF5 file.
pub struct RunWriter<'m> {
    w: Option<NcWriter>,
    model: &'m Model,
    ws: Workspace,
    row: Vec<f64>,
    /// Model time of the last record, years.
    pub last_time: f64,
    records: u64,
    /// Time-varying parameter keys written as `applied_*` series.
    params: Vec<String>,
    /// One record's values in write order (per-band fields, series, edges, parameters).
    rec: Vec<f64>,
    /// Annual-mean accumulator (`time.output = "annual_mean"`).
    annual: Option<YearMean>,
    /// Regression of the written `toa_imbalance` on `global_mean_temperature`.
    regression: Ols,
}

/// Trapezoid-rule means over whole model years of samples taken `per_year` times a year; the
/// sample at a year boundary counts half for each of the two years.
pub(crate) struct YearMean {
    per_year: usize,
    year: i64,
    /// Sum of weighted samples (sized by the caller to the record length).
    pub(crate) sum: Vec<f64>,
    /// Weight collected, in half samples.
    halves: usize,
}

impl YearMean {
    /// An accumulator for `per_year` samples a year, starting at time 0.
    pub(crate) fn new(per_year: usize) -> YearMean {
        YearMean {
            per_year,
            year: -1,
            sum: Vec::new(),
            halves: 0,
        }
    }

    /// Add a sample at `t`; when this sample closes a whole year, writes that year's mean into
    /// `out` and returns the year's index.
    pub(crate) fn add(&mut self, t: f64, rec: &[f64], out: &mut Vec<f64>) -> Option<i64> {
        let j = (t * self.per_year as f64).round() as i64;
        let (y, pos) = (
            j.div_euclid(self.per_year as i64),
            j.rem_euclid(self.per_year as i64),
        );
        let mut done = None;
        if pos == 0 {
            if y == self.year + 1 && self.halves + 1 == 2 * self.per_year {
                out.clear();
                out.extend(
                    self.sum
                        .iter()
                        .zip(rec)
                        .map(|(s, r)| (s + 0.5 * r) / self.per_year as f64),
                );
                done = Some(self.year);
            }
            self.year = y;
            self.sum.iter_mut().zip(rec).for_each(|(s, r)| *s = 0.5 * r);
            self.halves = 1;
        } else if y == self.year {
            self.sum.iter_mut().zip(rec).for_each(|(s, r)| *s += r);
            self.halves += 2;
        }
        done
    }
}

const PER_BAND: [(&str, &str, &str, Option<&str>); 4] = [
    (
        "surface_temperature",
        "K",
        "surface temperature",
        Some("surface_temperature"),
    ),
    (
        "absorbed_sunlight",
        "W m-2",
        "absorbed sunlight (insolation times coalbedo)",
        None,
    ),
    (
        "outgoing_longwave",
        "W m-2",
        "outgoing longwave radiation net of greenhouse forcing",
        Some("toa_outgoing_longwave_flux"),
    ),
    (
        "transport_convergence",
        "W m-2",
        "convergence of meridional heat transport",
        None,
    ),
];

const SERIES: [(&str, &str, &str); 8] = [
    (
        "global_mean_temperature",
        "K",
        "area-weighted global-mean surface temperature",
    ),
    (
        "global_mean_absorbed_sunlight",
        "W m-2",
        "global-mean absorbed sunlight",
    ),
    (
        "global_mean_outgoing_longwave",
        "W m-2",
        "global-mean outgoing longwave net of greenhouse forcing",
    ),
    (
        "global_mean_transport_convergence",
        "W m-2",
        "global-mean transport convergence (zero: transport conserves energy)",
    ),
    (
        "toa_imbalance",
        "W m-2",
        "global-mean net heating: absorbed - outgoing longwave + additive forcing",
    ),
    ("solar_scale", "1", "insolation multiplier applied"),
    (
        "greenhouse_forcing",
        "W m-2",
        "greenhouse forcing subtracted from outgoing longwave (k ln(CO2/CO2_ref) and any prescribed part)",
    ),
    ("additive_forcing", "W m-2", "additive forcing applied"),
];

impl<'m> RunWriter<'m> {
    /// Create the file (at a temporary name until `finish`) and define its variables.
    pub fn create(path: &Path, model: &'m Model, prov: &Provenance) -> Result<RunWriter<'m>, OutputError> {
        let mut w = create_file(path, prov)?;
        write_provenance(&mut w, prov, "run")?;
        w.add_unlimited_coordinate(
            "time",
            &[
                ("units", Attr::from("year")),
                ("long_name", Attr::from("model time (years of 365.25 days)")),
                ("axis", Attr::from("T")),
            ],
        )?;
        write_latitude(&mut w, &model.grid)?;
        w.add_variable_f64(
            "heat_capacity",
            &["lat"],
            &attrs("J m-2 K-1", "heat capacity per unit area", None),
        )?;
        w.write_f64("heat_capacity", &model.heat_capacity)?;
        for (name, units, long, std) in PER_BAND {
            w.add_variable_f64(name, &["time", "lat"], &attrs(units, long, std))?;
        }
        for (name, units, long) in SERIES {
            w.add_variable_f64(name, &["time"], &attrs(units, long, None))?;
        }
        let edge_attrs = |long: &str| {
            let mut a = attrs("degrees_north", long, None);
            a.push(("comment", Attr::from("equatorward edge of the polar ice from the interpolated freezing line; 90 (north) or -90 (south) ice free, 0 ice covered")));
            a
        };
        w.add_variable_f64(
            "ice_edge_latitude_north",
            &["time"],
            &edge_attrs("ice-edge latitude, northern hemisphere"),
        )?;
        if model.grid.domain == Domain::Globe {
            w.add_variable_f64(
                "ice_edge_latitude_south",
                &["time"],
                &edge_attrs("ice-edge latitude, southern hemisphere"),
            )?;
        }
        let params = model
            .forcing
            .as_ref()
            .map(|f| f.parameter_keys())
            .unwrap_or_default();
        for key in &params {
            let mut a = attrs(
                crate::forcing::units_of(key),
                &format!("value of config key {key} applied by the forcing history"),
                None,
            );
            a.push(("config_key", Attr::from(key.as_str())));
            w.add_variable_f64(&applied_name(key), &["time"], &a)?;
        }
        Ok(RunWriter {
            w: Some(w),
            model,
            ws: Workspace::new(model.len()),
            row: vec![0.0; model.len()],
            last_time: f64::NAN,
            records: 0,
            params,
            rec: Vec::new(),
            annual: None,
            regression: Ols::default(),
        })
    }

    /// Write annual means of samples taken `samples_per_year` times a year instead of the
    /// samples (call before the first record): records at mid-year with `time_bnds`, every
    /// variable marked `cell_methods = "time: mean"`; a last partial year is not written.
    pub fn annual_means(&mut self, samples_per_year: usize) -> Result<(), OutputError> {
        let w = self.writer();
        w.set_var_attr_str("time", "bounds", "time_bnds")?;
        w.add_variable_f64(
            "time_bnds",
            &["time", "bnds"],
            &attrs("year", "start and end of each averaging year", None),
        )?;
        let mut names: Vec<String> = PER_BAND.iter().map(|p| p.0.to_string()).collect();
        names.extend(SERIES.iter().map(|p| p.0.to_string()));
        names.push("ice_edge_latitude_north".into());
        if self.model.grid.domain == Domain::Globe {
            names.push("ice_edge_latitude_south".into());
        }
        names.extend(self.params.iter().map(|k| applied_name(k)));
        for name in names {
            self.writer()
                .set_var_attr_str(&name, "cell_methods", "time: mean")?;
        }
        self.writer().set_attr_str(
            "time_averaging",
            &format!("annual means, trapezoid rule over {samples_per_year} samples a year"),
        )?;
        self.annual = Some(YearMean::new(samples_per_year));
        Ok(())
    }

    /// The least-squares fit data of `toa_imbalance` on `global_mean_temperature` over the
    /// records written so far (for the Gregory regression).
    pub fn regression(&self) -> Ols {
        self.regression
    }

    fn writer(&mut self) -> &mut NcWriter {
        self.w.as_mut().expect("writer open until finish")
    }

    /// Records written so far.
    pub fn records(&self) -> u64 {
        self.records
    }

    /// Flush buffered records to disk (a killed process then leaves a readable file).
    pub fn flush(&mut self) -> Result<(), OutputError> {
        self.writer().flush()
    }

    /// Add a global attribute before finishing.
    pub fn set_attr(&mut self, name: &str, value: Attr) -> Result<(), OutputError> {
        match value {
            Attr::Str(s) => self.writer().set_attr_str(name, &s),
            Attr::F64(v) => self.writer().set_attr_f64(name, v),
            Attr::I64(v) => self.writer().set_attr_i64(name, v),
        }
    }

    /// Mark complete (or not), close and move the file to its target path.
    pub fn finish(mut self, complete: bool) -> Result<(), OutputError> {
        let t = self.last_time;
        let mut w = self.w.take().expect("writer open until finish");
        w.set_attr_f64("model_time_reached_years", t)?;
        mark_complete(&mut w, complete)?;
        w.finish()
    }

    fn write_record(&mut self, t: f64, temps: &[f64]) -> Result<(), OutputError> {
        let model = self.model;
        let b = model.budget(t, temps, &mut self.ws);
        let d = model.drivers_at(t);
        let g = &model.grid;
        let (north, south) = model.ice_edges_at(t, temps);
        let mut rec = std::mem::take(&mut self.rec);
        rec.clear();
        for part in [temps, &b.absorbed, &b.olr, &b.transport] {
            rec.extend_from_slice(part);
        }
        let (ma, mo, mt) = (g.mean(&b.absorbed), g.mean(&b.olr), g.mean(&b.transport));
        rec.extend_from_slice(&[
            g.mean(temps),
            ma,
            mo,
            mt,
            ma - mo + mt + b.extra,
            d.solar_scale,
            d.greenhouse_wm2,
            d.extra_wm2,
            north,
        ]);
        if let Some(s) = south {
            rec.push(s);
        }
        if let Some(f) = &model.forcing {
            let start = rec.len();
            rec.resize(start + self.params.len(), 0.0);
            f.parameter_values(t, &mut rec[start..]);
        }
        self.row.copy_from_slice(temps);
        self.last_time = t;
        let result = match self.annual.as_mut() {
            None => self.emit(t, None, &rec),
            Some(acc) => {
                if acc.sum.len() != rec.len() {
                    acc.sum = vec![0.0; rec.len()];
                }
                let mut mean = Vec::new();
                match acc.add(t, &rec, &mut mean) {
                    Some(year) => self.emit(year as f64 + 0.5, Some((year as f64, year as f64 + 1.0)), &mean),
                    None => Ok(()),
                }
            }
        };
        self.rec = rec;
        result
    }

    /// Append one record (`rec` in the order of `write_record`).
    fn emit(&mut self, t: f64, bounds: Option<(f64, f64)>, rec: &[f64]) -> Result<(), OutputError> {
        let n = self.model.len();
        let globe = self.model.grid.domain == Domain::Globe;
        let params = std::mem::take(&mut self.params);
        let w = self.w.as_mut().expect("open");
        w.append_coordinate("time", t)?;
        if let Some((a, b)) = bounds {
            w.append_row_f64("time_bnds", &[a, b])?;
        }
        for (k, (name, _, _, _)) in PER_BAND.iter().enumerate() {
            w.append_row_f64(name, &rec[k * n..(k + 1) * n])?;
        }
        let mut at = PER_BAND.len() * n;
        for (name, _, _) in SERIES.iter() {
            w.append_row_f64(name, &[rec[at]])?;
            at += 1;
        }
        w.append_row_f64("ice_edge_latitude_north", &[rec[at]])?;
        at += 1;
        if globe {
            w.append_row_f64("ice_edge_latitude_south", &[rec[at]])?;
            at += 1;
        }
        for key in &params {
            w.append_row_f64(&applied_name(key), &[rec[at]])?;
            at += 1;
        }
        self.params = params;
        let gmt = rec[PER_BAND.len() * n];
        let toa = rec[PER_BAND.len() * n + 4];
        self.regression.add(gmt, toa);
        self.records += 1;
        Ok(())
    }

    /// The last recorded state, K.
    pub fn last_state(&self) -> &[f64] {
        &self.row
    }
}

impl Observer for RunWriter<'_> {
    fn record(&mut self, t: f64, temps: &[f64]) -> Result<(), Box<dyn std::error::Error + Send + Sync>> {
        self.write_record(t, temps).map_err(|e| Box::new(e) as _)
    }
}

/// Variable name of a time-varying config key in a run file: `applied_` and the key with dots
/// as underscores (`transport.diffusivity` -> `applied_transport_diffusivity`).
pub fn applied_name(key: &str) -> String {
    format!("applied_{}", key.replace('.', "_"))
}
