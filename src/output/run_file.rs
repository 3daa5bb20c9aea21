//! The file of `icefold run`: fixed names of DESIGN section 4 plus the energy budget and the
//! drivers actually applied, streamed record by record (memory flat in run length).

use super::common::{attrs, mark_complete, write_latitude, write_provenance, Provenance};
use super::OutputError;
use super::{Attr, NcWriter};
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
        let mut w = NcWriter::create(path)?;
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
        Ok(RunWriter {
            w: Some(w),
            model,
            ws: Workspace::new(model.len()),
            row: vec![0.0; model.len()],
            last_time: f64::NAN,
            records: 0,
        })
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
        let (north, south) = model.ice_edges(temps);
        let w = self.w.as_mut().expect("open");
        w.append_coordinate("time", t)?;
        w.append_row_f64("surface_temperature", temps)?;
        w.append_row_f64("absorbed_sunlight", &b.absorbed)?;
        w.append_row_f64("outgoing_longwave", &b.olr)?;
        w.append_row_f64("transport_convergence", &b.transport)?;
        let (ma, mo, mt) = (g.mean(&b.absorbed), g.mean(&b.olr), g.mean(&b.transport));
        let vals = [
            g.mean(temps),
            ma,
            mo,
            mt,
            ma - mo + mt + b.extra,
            d.solar_scale,
            d.greenhouse_wm2,
            d.extra_wm2,
        ];
        for ((name, _, _), v) in SERIES.iter().zip(vals) {
            w.append_row_f64(name, &[v])?;
        }
        w.append_row_f64("ice_edge_latitude_north", &[north])?;
        if let Some(s) = south {
            w.append_row_f64("ice_edge_latitude_south", &[s])?;
        }
        self.row.copy_from_slice(temps);
        self.last_time = t;
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
