//! The file of `icefold run`: fixed names of DESIGN section 4 plus the energy budget and the
//! drivers actually applied, streamed record by record (memory flat in run length).

use super::common::{attrs, create_file, mark_complete, write_latitude, write_provenance, Provenance};
use super::OutputError;
use super::{Attr, NcWriter};
use crate::ensemble::stats::Ols;
use crate::grid::Domain;
use crate::integrate::driver::ObserverError;
use crate::integrate::Observer;
use crate::model::{Budget, Model, Workspace};
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
    /// Time integral of every record value since the last mean record (`time.output =
    /// "annual_mean"`: [`Observer::accumulate`]), empty otherwise.
    mean_sum: Vec<f64>,
    /// Scratch budget (sized to the bands).
    budget: Budget,
    /// Regression of the written `toa_imbalance` on `global_mean_temperature`.
    regression: Ols,
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
                crate::forcing::column_units(key).unwrap_or_else(|| crate::config::keys::units(key)),
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
            mean_sum: Vec::new(),
            budget: Budget {
                absorbed: vec![0.0; model.len()],
                olr: vec![0.0; model.len()],
                transport: vec![0.0; model.len()],
                extra: 0.0,
            },
            regression: Ols::default(),
        })
    }

    /// Write annual means instead of instants (call before the first record): records at
    /// mid-year with `time_bnds`, every variable marked `cell_methods = "time: mean"`, each the
    /// time integral over the year of the value along the dense trajectory divided by the year
    /// (fed by [`Observer::accumulate`] and written by [`Observer::record_mean`]).
    pub fn annual_means(&mut self) -> Result<(), OutputError> {
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
            "annual means: the time integral over each model year of every value along the dense trajectory (3-point Gauss-Legendre quadrature of each time step's interpolant), divided by the year; ice edges are means of the instantaneous edge",
        )?;
        self.mean_sum = vec![0.0; self.record_len()];
        Ok(())
    }

    /// Values in one record.
    fn record_len(&self) -> usize {
        let globe = self.model.grid.domain == Domain::Globe;
        PER_BAND.len() * self.model.len() + SERIES.len() + 1 + usize::from(globe) + self.params.len()
    }

    /// The mean record last written (the values in write order), for checkpoints.
    pub fn last_values(&self) -> &[f64] {
        &self.rec
    }

    /// Write again a mean record over `[a, b]` with the values `values` (from
    /// [`RunWriter::last_values`], when resuming), `end` the state at `b`.
    pub fn replay_mean(&mut self, a: f64, b: f64, values: &[f64], end: &[f64]) -> Result<(), OutputError> {
        self.rec.clear();
        self.rec.extend_from_slice(values);
        let rec = std::mem::take(&mut self.rec);
        let r = self.emit(0.5 * (a + b), Some((a, b)), &rec);
        self.rec = rec;
        self.row.copy_from_slice(end);
        self.last_time = b;
        r
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

    /// Every record value at the state `temps` (K) at time `t` (years) into `self.rec`, in
    /// write order (per-band fields, series, edges, parameters).
    fn fill(&mut self, t: f64, temps: &[f64]) {
        let model = self.model;
        model.budget_into(t, temps, &mut self.ws, &mut self.budget);
        let b = &self.budget;
        let d = model.drivers_at(t);
        let g = &model.grid;
        let (north, south) = model.ice_edges_at(t, temps);
        let rec = &mut self.rec;
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
    }

    fn write_record(&mut self, t: f64, temps: &[f64]) -> Result<(), OutputError> {
        self.fill(t, temps);
        self.row.copy_from_slice(temps);
        self.last_time = t;
        let rec = std::mem::take(&mut self.rec);
        let result = self.emit(t, None, &rec);
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
    fn record(&mut self, t: f64, temps: &[f64]) -> Result<(), ObserverError> {
        self.write_record(t, temps).map_err(|e| Box::new(e) as _)
    }

    fn accumulate(&mut self, t: f64, weight: f64, temps: &[f64]) -> Result<(), ObserverError> {
        if self.mean_sum.is_empty() {
            return Err("time means were not set up (RunWriter::annual_means)".into());
        }
        self.fill(t, temps);
        for (s, v) in self.mean_sum.iter_mut().zip(&self.rec) {
            *s += weight * v;
        }
        Ok(())
    }

    fn record_mean(&mut self, a: f64, b: f64, end: &[f64]) -> Result<(), ObserverError> {
        if self.mean_sum.is_empty() {
            return Err("time means were not set up (RunWriter::annual_means)".into());
        }
        let span = b - a;
        self.rec.clear();
        self.rec.extend(self.mean_sum.iter().map(|s| s / span));
        self.mean_sum.iter_mut().for_each(|s| *s = 0.0);
        let rec = std::mem::take(&mut self.rec);
        let r = self.emit(0.5 * (a + b), Some((a, b)), &rec);
        self.rec = rec;
        self.row.copy_from_slice(end);
        self.last_time = b;
        r.map_err(|e| Box::new(e) as _)
    }
}

/// Variable name of a time-varying config key in a run file: `applied_` and the key with dots
/// as underscores (`transport.diffusivity` -> `applied_transport_diffusivity`).
pub fn applied_name(key: &str) -> String {
    format!("applied_{}", key.replace('.', "_"))
}
