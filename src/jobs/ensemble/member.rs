//! One ensemble member: its run through a collector of the per-member series (global mean,
//! top-of-atmosphere imbalance, ice edges, optionally the field), its Gregory fit and its
//! doubled-CO2 sensitivity; and the shared time axis.

use crate::config::spec::{EnsembleSpec, OutputMode};
use crate::config::{ConfigError, Loaded};
use crate::equilibrium::NewtonOptions;
use crate::error::Error;
use crate::grid::Grid;
use crate::integrate::driver::{self, Observer, ObserverError, RunError};
use crate::model::{Model, Workspace};
use crate::output::ensemble_file::{EnsembleData, SensitivityColumns};
use std::ops::Range;

/// What this shard runs: its members, their samples and the shape of their records.
pub(super) struct Plan {
    /// The `[ensemble]` section.
    pub spec: EnsembleSpec,
    /// This shard's members.
    pub range: Range<usize>,
    /// The sampled keys.
    pub keys: Vec<String>,
    /// This shard's samples, one row of key values per member.
    pub samples: Vec<Vec<f64>>,
    /// The output times.
    pub times: Vec<f64>,
    /// The grid (bands `n`, both hemispheres or one).
    pub grid: Grid,
    /// Bands.
    pub n: usize,
    /// Whether the grid is a globe (a southern ice edge too).
    pub globe: bool,
    /// Values per record: global mean, imbalance, ice edge(s), the field if asked.
    pub width: usize,
}

/// What one member produced.
pub(super) struct MemberResult {
    /// `[time][gmt, toa, north, south?, field...]` flattened, NaN-filled after a failure.
    pub records: Vec<f64>,
    pub failure: Option<String>,
    pub fit: Option<crate::ensemble::stats::Fit>,
    pub sensitivity: Option<[f64; 4]>,
}

/// Collects a member's records (through annual means if asked).
struct Collector<'m> {
    model: &'m Model,
    ws: Workspace,
    heat: Vec<f64>,
    rec: Vec<f64>,
    width: usize,
    fields: bool,
    /// Time integral of each record value since the last annual mean (annual means only).
    mean_sum: Vec<f64>,
    out: Vec<f64>,
    ols: crate::ensemble::stats::Ols,
}

impl Collector<'_> {
    fn push(&mut self, rec: &[f64]) {
        self.ols.add(rec[0], rec[1]);
        self.out.extend_from_slice(rec);
    }
}

impl Collector<'_> {
    /// The record values at the state `temps` (K) at time `t` (years) into `self.rec`.
    fn fill(&mut self, t: f64, temps: &[f64]) {
        let m = self.model;
        // The global mean of the net heating is the top-of-atmosphere imbalance (absorbed -
        // outgoing + transport convergence + additive forcing), without allocating a budget.
        m.heating(t, temps, &mut self.ws, &mut self.heat);
        let g = &m.grid;
        let (north, south) = m.ice_edges_at(t, temps);
        self.rec.clear();
        self.rec.push(g.mean(temps));
        self.rec.push(g.mean(&self.heat));
        self.rec.push(north);
        if let Some(s) = south {
            self.rec.push(s);
        }
        if self.fields {
            self.rec.extend_from_slice(temps);
        }
    }
}

impl Observer for Collector<'_> {
    fn record(&mut self, t: f64, temps: &[f64]) -> Result<(), ObserverError> {
        self.fill(t, temps);
        let rec = std::mem::take(&mut self.rec);
        self.push(&rec);
        self.rec = rec;
        debug_assert!(self.out.len() % self.width == 0);
        Ok(())
    }

    fn accumulate(&mut self, t: f64, weight: f64, temps: &[f64]) -> Result<(), ObserverError> {
        self.fill(t, temps);
        self.mean_sum.resize(self.rec.len(), 0.0);
        for (s, v) in self.mean_sum.iter_mut().zip(&self.rec) {
            *s += weight * v;
        }
        Ok(())
    }

    fn record_mean(&mut self, a: f64, b: f64, _end: &[f64]) -> Result<(), ObserverError> {
        self.mean_sum.resize(self.width, 0.0);
        let mut rec = std::mem::take(&mut self.rec);
        rec.clear();
        rec.extend(self.mean_sum.iter().map(|s| s / (b - a)));
        self.mean_sum.iter_mut().for_each(|s| *s = 0.0);
        self.push(&rec);
        self.rec = rec;
        Ok(())
    }
}

/// The output times every member shares.
pub(super) fn time_axis(cfg: &Loaded) -> Result<Vec<f64>, Error> {
    let t = &cfg.spec.time;
    match t.output {
        OutputMode::Instant => Ok(driver::output_times(t.years, t.output_every).collect()),
        OutputMode::AnnualMean => Ok((0..driver::whole_years(t.years))
            .map(|y| y as f64 + 0.5)
            .collect()),
        OutputMode::EveryStep => Err(Error::Config(ConfigError::Range {
            path: cfg.source.clone(),
            key: "time.output".into(),
            value: "\"every_step\"".into(),
            allowed: "allowed in an ensemble: \"instant\" or \"annual_mean\" (members need one time axis)"
                .into(),
        })),
    }
}

pub(super) fn run_member(cfg: &Loaded, spec: &EnsembleSpec, times: usize) -> MemberResult {
    let model = Model::from_spec(&cfg.spec.model);
    let y0 = model.initial_state(&cfg.spec.initial);
    let globe = model.grid.domain == crate::grid::Domain::Globe;
    let width = 3 + usize::from(globe) + if spec.fields { model.len() } else { 0 };
    let mut c = Collector {
        model: &model,
        ws: Workspace::new(model.len()),
        heat: vec![0.0; model.len()],
        rec: Vec::with_capacity(width),
        width,
        fields: spec.fields,
        mean_sum: Vec::with_capacity(width),
        out: Vec::with_capacity(width * times),
        ols: Default::default(),
    };
    let result = driver::run(&model, &cfg.spec.time, &y0, &mut c, &mut |_| {});
    let failure = match result {
        Ok(_) => None,
        Err(RunError::Solver(e)) => Some(e.to_string()),
        Err(e) => Some(e.to_string()),
    };
    let mut records = c.out;
    records.resize(width * times, f64::NAN);
    let fit = crate::jobs::diagnostics::gregory(&c.ols);
    let sensitivity = spec.sensitivity.then(|| {
        let eq = &cfg.spec.equilibrium;
        let opts = NewtonOptions {
            tolerance_wm2: eq.tolerance_wm2,
            max_iterations: eq.max_iterations,
            ..NewtonOptions::default()
        };
        match crate::jobs::diagnostics::co2_doubling(&model, &y0, cfg.spec.model.co2.2, opts) {
            Ok(s) => [
                s.ecs_k,
                s.ice_edge_base_deg,
                s.ice_edge_doubled_deg,
                s.ice_edge_per_wm2,
            ],
            Err(_) => [f64::NAN; 4],
        }
    });
    MemberResult {
        records,
        failure,
        fit,
        sensitivity,
    }
}

/// The file content of the finished members (member order).
pub(super) fn assemble(cfg: &Loaded, plan: &Plan, results: Vec<MemberResult>) -> EnsembleData {
    let (spec, range, n, width) = (&plan.spec, plan.range.clone(), plan.n, plan.width);
    let globe = plan.globe;
    let count = results.len();
    let nt = plan.times.len();
    let mut data = EnsembleData {
        config_toml: cfg.resolved_text(),
        title: cfg.spec.title.clone(),
        deflate_level: cfg.spec.output.deflate_level,
        members_total: spec.members,
        first_member: range.start,
        seed: spec.seed,
        keys: plan.keys.clone(),
        distributions: spec.parameters.iter().map(|(_, d)| d.describe()).collect(),
        samples: plan.samples.iter().flatten().copied().collect(),
        time: plan.times.clone(),
        annual_means: matches!(cfg.spec.time.output, OutputMode::AnnualMean),
        lat: plan.grid.lat_centres_deg(),
        lat_bnds: {
            let f = plan.grid.lat_faces_deg();
            (0..n).flat_map(|i| [f[i], f[i + 1]]).collect()
        },
        area_weight: plan.grid.weights.clone(),
        global_mean_temperature: Vec::with_capacity(count * nt),
        toa_imbalance: Vec::with_capacity(count * nt),
        ice_edge_latitude_north: Vec::with_capacity(count * nt),
        ice_edge_latitude_south: globe.then(|| Vec::with_capacity(count * nt)),
        status: Vec::with_capacity(count),
        feedback: Vec::with_capacity(count),
        effective_forcing: Vec::with_capacity(count),
        gregory_r2: Vec::with_capacity(count),
        sensitivity: spec.sensitivity.then(SensitivityColumns::default),
        fields: spec.fields.then(|| Vec::with_capacity(count * nt * n)),
        failures: Vec::new(),
    };
    for (i, r) in results.into_iter().enumerate() {
        for rec in r.records.chunks_exact(width) {
            data.global_mean_temperature.push(rec[0]);
            data.toa_imbalance.push(rec[1]);
            data.ice_edge_latitude_north.push(rec[2]);
            if let Some(s) = data.ice_edge_latitude_south.as_mut() {
                s.push(rec[3]);
            }
            if let Some(f) = data.fields.as_mut() {
                f.extend_from_slice(&rec[width - n..]);
            }
        }
        data.status.push(i32::from(r.failure.is_some()));
        if let Some(msg) = r.failure {
            data.failures.push((range.start + i, msg));
        }
        data.feedback.push(r.fit.map_or(f64::NAN, |f| f.slope));
        data.effective_forcing
            .push(r.fit.map_or(f64::NAN, |f| f.intercept_at_first));
        data.gregory_r2.push(r.fit.map_or(f64::NAN, |f| f.r2));
        if let (Some(cols), Some(s)) = (data.sensitivity.as_mut(), r.sensitivity) {
            cols.ecs_k.push(s[0]);
            cols.ice_edge_base_deg.push(s[1]);
            cols.ice_edge_doubled_deg.push(s[2]);
            cols.ice_edge_per_wm2.push(s[3]);
        }
    }
    data.samples.truncate(count * data.keys.len());
    data
}
